import { createWriteStream } from 'node:fs';
import { once } from 'node:events';
import { configSchema } from '../../config/config.js';
import { openRuntime } from '../../runtime.js';
import { fromFloat64Blob } from '../../store/float64-blob.js';
import { forEachRow } from '../../store/awaitable.js';
import type { LoggedVectorView } from '../../store/outcomes-store.js';
import { type CliIo, UsageError, fileProblem } from '../io.js';
import { auditLogAt } from './store-location.js';

export interface ExportContext {
  db: string;
  model: string;
  from: Date;
  to: Date;
  /** only: answers with an outcome (for training); any: every answer, the label empty where none is known. */
  outcomes: 'only' | 'any';
  out: string;
}

export interface ExportSummary {
  rows: number;
  labelled: number;
  /** Answers of bundles whose features differ from the bundle loaded last, left out. */
  otherFeatures: number;
  features: string[];
}

/** RFC 4180: a field with a comma, a quote or a line break is quoted, its quotes doubled. */
const field = (s: string): string => (/[",\r\n]/.test(s) ? `"${s.replaceAll('"', '""')}"` : s);

/**
 * `plumbline export`: the logged vectors of a model as a CSV that `plumbline train` reads
 * (`--label label --ignore request_id,received_at`): request_id, received_at, the features by name
 * in the order of the bundle loaded last, and the outcome in `label`. Values are written as the
 * shortest decimal that reads back to the same float64, so nothing is lost on the way.
 */
export async function exportAction(ctx: ExportContext, io: CliIo): Promise<ExportSummary> {
  const db = auditLogAt(ctx.db);
  if (!(ctx.from.getTime() < ctx.to.getTime())) throw new UsageError(`--from ${ctx.from.toISOString()} must be before --to ${ctx.to.toISOString()}`);
  const runtime = await openRuntime(configSchema.parse({ db }), { models: false });
  try {
    const outcomes = runtime.store.outcomes;
    const latest = await outcomes.latestModel(ctx.model);
    if (!latest) throw new UsageError(`${ctx.db}: the audit log holds no bundle for a model named ${JSON.stringify(ctx.model)}`);
    const names = latest.features.map((f) => f.name);
    const same = new Map<string, boolean>();
    const fits = async (sha256: string): Promise<boolean> => {
      let ok = same.get(sha256);
      if (ok === undefined) {
        const m = await outcomes.describeModel(sha256);
        ok = m !== null && m.features.length === names.length && m.features.every((f, j) => f.name === names[j]);
        same.set(sha256, ok);
      }
      return ok;
    };
    const out = createWriteStream(ctx.out);
    const opened = once(out, 'open').catch((err: unknown) => {
      throw fileProblem('--out', ctx.out, err);
    });
    await opened;
    const summary: ExportSummary = { rows: 0, labelled: 0, otherFeatures: 0, features: names };
    const write = async (line: string): Promise<void> => {
      if (!out.write(line)) await once(out, 'drain');
    };
    try {
      await write(`${['request_id', 'received_at', ...names, 'label'].map(field).join(',')}\n`);
      // The CLI's own connection: nothing else reads or writes on it while the rows stream.
      await forEachRow(outcomes.loggedVectors(ctx.model, ctx.from.getTime(), ctx.to.getTime(), ctx.outcomes === 'only'), async (row: LoggedVectorView) => {
        if (!(await fits(row.model_sha256))) {
          summary.otherFeatures++;
          return;
        }
        const x = fromFloat64Blob(row.features);
        await write(`${row.request_id},${new Date(row.received_at).toISOString()},${Array.from(x, (v) => String(v)).join(',')},${field(row.actual ?? '')}\n`);
        summary.rows++;
        if (row.actual !== null) summary.labelled++;
      });
    } finally {
      out.end();
      await once(out, 'close');
    }
    const skipped = summary.otherFeatures > 0 ? `; ${summary.otherFeatures} answers of bundles with other features left out` : '';
    io.stderr.write(`wrote ${summary.rows} rows (${summary.labelled} with an outcome) of ${ctx.model}, ${names.length} features, to ${ctx.out}${skipped}\n`);
    return summary;
  } finally {
    await runtime.close();
  }
}
