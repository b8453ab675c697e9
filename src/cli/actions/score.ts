import { open } from 'node:fs/promises';
import { once } from 'node:events';
import type { Writable } from 'node:stream';
import { ScoreOverflowError, createScorer, modelRef } from '../../bundle/scorer.js';
import type { ScoreOutcome } from '../../contracts/score.js';
import { readBundle } from '../../bundle/verify.js';
import { explainerFor } from '../../bundle/explainer.js';
import { uuidv7 } from '../../ids.js';
import { DataFileError, openCsv } from '../../io/csv.js';
import { parseFeatures, planColumns } from '../../io/feature-table.js';
import { type CliIo, fileProblem } from '../io.js';

export interface ScoreContext {
  bundle: string;
  data: string;
  /** JSON lines go here; standard output when omitted. */
  out?: string;
  batchSize: number;
  /** Add each answer's explanation (plumbline explain). */
  explain?: boolean;
}

export interface ScoreSummary {
  scored: number;
  rejected: number;
  outOfDomain: number;
}

async function write(stream: Writable, text: string): Promise<void> {
  if (!stream.write(text)) await once(stream, 'drain');
}

/**
 * `plumbline score`: streams a CSV of any size through the bundle, one JSON line per good row in
 * the service's response shape plus `line`, the CSV line the row starts on, to join answers back
 * to their rows. A bad row is reported on stderr with its line and column and is not scored; the
 * summary counts it. Memory is bounded by the batch size.
 */
export async function scoreAction(ctx: ScoreContext, io: CliIo): Promise<ScoreSummary> {
  const bundle = await readBundle(ctx.bundle);
  const scorer = createScorer(bundle);
  const model = modelRef(bundle);
  const csv = await openCsv(ctx.data);
  const plan = planColumns(csv.header, ctx.data, { features: [...scorer.featureNames] }, csv.headerLine);
  const d = plan.featureNames.length;
  // Opened before reading so that a bad --out path fails at once, not after the first batch.
  let out: Writable = io.stdout;
  if (ctx.out) {
    try {
      out = (await open(ctx.out, 'w')).createWriteStream();
    } catch (err) {
      throw fileProblem('--out', ctx.out, err);
    }
  }
  const x = new Float64Array(ctx.batchSize * d);
  const lines = new Int32Array(ctx.batchSize);
  const summary: ScoreSummary = { scored: 0, rejected: 0, outOfDomain: 0 };
  let rows = 0;

  const reject = (err: DataFileError): void => {
    summary.rejected++;
    io.stderr.write(`${err.message}\n`);
  };
  const explainer = ctx.explain ? explainerFor(bundle) : null;
  const render = (o: ScoreOutcome, line: number, row: Float64Array): string => {
    if (!o.domain.in_domain) summary.outOfDomain++;
    summary.scored++;
    const answer = explainer ? { request_id: uuidv7(), model, ...o, explanation: explainer.explain(row, o.label, o.domain.in_domain), line } : { request_id: uuidv7(), model, ...o, line };
    return `${JSON.stringify(answer)}\n`;
  };
  const flush = async (): Promise<void> => {
    if (rows === 0) return;
    let text = '';
    try {
      scorer.scoreRows(x, rows).forEach((o, r) => (text += render(o, lines[r] as number, x.subarray(r * d, r * d + d))));
    } catch (err) {
      if (!(err instanceof ScoreOverflowError)) throw err;
      // Rare: find the rows that overflow by scoring one at a time.
      text = '';
      for (let r = 0; r < rows; r++) {
        try {
          text += render(scorer.scoreRows(x.subarray(r * d, r * d + d), 1)[0] as ScoreOutcome, lines[r] as number, x.subarray(r * d, r * d + d));
        } catch (e) {
          if (!(e instanceof ScoreOverflowError)) throw e;
          reject(new DataFileError(ctx.data, lines[r] as number, null, 'the network overflows on these values (a logit is not finite)'));
        }
      }
    }
    rows = 0;
    await write(out, text);
  };

  try {
    for await (const row of csv.rows) {
      try {
        parseFeatures(row.fields, row.line, plan, ctx.data, x, rows * d);
      } catch (err) {
        if (!(err instanceof DataFileError)) throw err;
        reject(err);
        continue;
      }
      lines[rows] = row.line;
      rows++;
      if (rows === ctx.batchSize) await flush();
    }
    await flush();
  } finally {
    if (ctx.out) {
      out.end();
      await once(out, 'close');
    }
  }
  io.stderr.write(`scored ${summary.scored} rows (${summary.outOfDomain} out of domain), rejected ${summary.rejected}\n`);
  return summary;
}
