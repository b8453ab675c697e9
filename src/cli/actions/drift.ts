import { existsSync, rmSync } from 'node:fs';
import { type FileHandle, open } from 'node:fs/promises';
import { renderReportHtml } from '../../reports/html.js';
import type { DriftReport } from '../../contracts/drift-report.js';
import { configSchema } from '../../config/config.js';
import { ReportError } from '../../reports/service.js';
import { openRuntime } from '../../runtime.js';
import { type CliIo, UsageError, fileProblem } from '../io.js';

export interface DriftContext {
  db: string;
  model: string;
  from: Date;
  to: Date;
  json?: string;
  html?: string;
  minRows: number;
  sampleCap: number;
}

const pct = (v: number | null): string => (v === null ? '–' : `${(v * 100).toFixed(1)}%`);

/** The summary a person reads at the terminal: verdict, counts, findings, and the outcomes when known. */
export function formatReportSummary(r: DriftReport): string {
  const o = r.out_of_domain;
  return [
    `drift report ${r.id}: ${r.model.name} version ${r.model.version}, ${r.window.from} to ${r.window.to}`,
    `verdict: ${r.verdict}`,
    `scored ${r.counts.scored}, refused ${r.counts.rejected}, out of domain ${r.counts.out_of_domain}${o.rate !== null ? ` (${(o.rate * 100).toFixed(2)}%, expected ${(o.expected_rate * 100).toFixed(2)}%)` : ''}`,
    ...r.findings.map((f, i) => `${i + 1}. ${f}`),
    ...(r.outcomes
      ? [`outcomes: ${r.outcomes.labelled} of the ${r.outcomes.scored} answers have one; right ${pct(r.outcomes.accuracy.value)}, in domain ${pct(r.outcomes.by_domain.in_domain.accuracy)}, out of domain ${pct(r.outcomes.by_domain.out_of_domain.accuracy)}`]
      : []),
  ].join('\n');
}

/** An output file opened before the report runs, so that a bad path fails in a second, not after the report. */
interface Output {
  flag: string;
  path: string;
  file: FileHandle;
  /** It did not exist before: removed again if the report fails. */
  created: boolean;
}

async function openOutputs(ctx: DriftContext): Promise<Output[]> {
  const outputs: Output[] = [];
  for (const [flag, path] of [['--json', ctx.json], ['--html', ctx.html]] as const) {
    if (path === undefined) continue;
    const created = !existsSync(path);
    try {
      outputs.push({ flag, path, file: await open(path, 'w'), created });
    } catch (err) {
      await discard(outputs);
      throw fileProblem(flag, path, err);
    }
  }
  return outputs;
}

async function discard(outputs: Output[]): Promise<void> {
  for (const o of outputs) {
    await o.file.close();
    if (o.created) rmSync(o.path, { force: true });
  }
}

/** `plumbline drift`: a report over the audit log in the database, stored there and printed. */
export async function driftAction(ctx: DriftContext, io: CliIo): Promise<DriftReport> {
  if (!(ctx.from.getTime() < ctx.to.getTime())) throw new UsageError(`--from ${ctx.from.toISOString()} must be before --to ${ctx.to.toISOString()}`);
  const outputs = await openOutputs(ctx);
  let report: DriftReport;
  try {
    // The bundle comes from the audit log, not from a models directory: none is loaded.
    const runtime = await openRuntime(configSchema.parse({ db: ctx.db, reports: { min_rows: ctx.minRows, sample_cap: ctx.sampleCap } }), { models: false });
    try {
      report = await runtime.reports.run(ctx.model, { from: ctx.from.getTime(), to: ctx.to.getTime() }, 'cli');
    } finally {
      await runtime.close();
    }
  } catch (err) {
    await discard(outputs);
    if (err instanceof ReportError) throw new UsageError(`${ctx.db}: ${err.message}`);
    throw err;
  }
  for (const o of outputs) {
    try {
      await o.file.writeFile(o.flag === '--json' ? `${JSON.stringify(report, null, 2)}\n` : renderReportHtml(report));
      await o.file.close();
    } catch (err) {
      throw fileProblem(o.flag, o.path, err);
    }
  }
  io.stdout.write(`${formatReportSummary(report)}\n`);
  return report;
}
