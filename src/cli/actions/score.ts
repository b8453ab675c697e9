import { open } from 'node:fs/promises';
import { once } from 'node:events';
import type { Writable } from 'node:stream';
import { createScorer, modelRef } from '../../bundle/scorer.js';
import { readBundle } from '../../bundle/verify.js';
import { uuidv7 } from '../../ids.js';
import { DataFileError, openCsv } from '../../io/csv.js';
import { parseFeatures, planColumns } from '../../io/feature-table.js';
import type { CliIo } from '../io.js';

export interface ScoreContext {
  bundle: string;
  data: string;
  /** JSON lines go here; standard output when omitted. */
  out?: string;
  batchSize: number;
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
 * the service's response shape. A bad row is reported on stderr with its line and column and is
 * not scored; the summary counts it. Memory is bounded by the batch size.
 */
export async function scoreAction(ctx: ScoreContext, io: CliIo): Promise<ScoreSummary> {
  const bundle = await readBundle(ctx.bundle);
  const scorer = createScorer(bundle);
  const model = modelRef(bundle);
  const csv = await openCsv(ctx.data);
  const plan = planColumns(csv.header, ctx.data, { features: [...scorer.featureNames] });
  const d = plan.featureNames.length;
  // Opened before reading so that a bad --out path fails at once, not after the first batch.
  const out = ctx.out ? (await open(ctx.out, 'w')).createWriteStream() : io.stdout;
  const x = new Float64Array(ctx.batchSize * d);
  const summary: ScoreSummary = { scored: 0, rejected: 0, outOfDomain: 0 };
  let rows = 0;

  const flush = async (): Promise<void> => {
    if (rows === 0) return;
    const outcomes = scorer.scoreRows(x, rows);
    let text = '';
    for (const o of outcomes) {
      text += `${JSON.stringify({ request_id: uuidv7(), model, ...o })}\n`;
      if (!o.domain.in_domain) summary.outOfDomain++;
    }
    summary.scored += rows;
    rows = 0;
    await write(out, text);
  };

  try {
    for await (const row of csv.rows) {
      try {
        parseFeatures(row.fields, row.line, plan, ctx.data, x, rows * d);
      } catch (err) {
        if (!(err instanceof DataFileError)) throw err;
        summary.rejected++;
        io.stderr.write(`${err.message}\n`);
        continue;
      }
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
