import { writeFile } from 'node:fs/promises';
import { readBundle } from '../../bundle/verify.js';
import type { LoadedBundle } from '../../bundle/verify.js';
import { configSchema } from '../../config/config.js';
import type { CompareReport } from '../../contracts/compare-report.js';
import { IncompatibleBundleError, compareCandidate } from '../../reports/compare.js';
import { renderCompareHtml } from '../../reports/compare-html.js';
import { openRuntime } from '../../runtime.js';
import { type CliIo, UsageError, fileProblem } from '../io.js';
import { auditLogAt } from './store-location.js';

export interface CompareContext {
  db: string;
  model: string;
  candidate: string;
  from: Date;
  to: Date;
  json?: string;
  html?: string;
}

const pct = (v: number | null): string => (v === null ? '–' : `${(v * 100).toFixed(1)}%`);

/** The comparison as a person reads it at the terminal. */
export function formatCompareSummary(r: CompareReport, candidateFile: string): string {
  return [
    `compare: ${r.model} as logged (${r.current.map((m) => `version ${m.version}`).join(', ')}) against ${r.candidate.name} version ${r.candidate.version} (${candidateFile}), answers from ${r.window.from} to ${r.window.to}`,
    `rescored ${r.rows} (left out ${r.skipped}); same label ${pct(r.agreement.rate)}; in domain: logged ${pct(r.in_domain.current)}, candidate ${pct(r.in_domain.candidate)}`,
    `with an outcome ${r.labelled}: right, logged ${pct(r.accuracy.current.value)}, candidate ${pct(r.accuracy.candidate.value)}; logged alone right ${r.mcnemar.current_only}, candidate alone right ${r.mcnemar.candidate_only}`,
    ...r.findings.map((f, i) => `${i + 1}. ${f}`),
  ].join('\n');
}

/** `plumbline compare`: a candidate bundle rescoring the logged vectors of a model, offline. */
export async function compareAction(ctx: CompareContext, io: CliIo): Promise<CompareReport> {
  const db = auditLogAt(ctx.db);
  if (!(ctx.from.getTime() < ctx.to.getTime())) throw new UsageError(`--from ${ctx.from.toISOString()} must be before --to ${ctx.to.toISOString()}`);
  let candidate: LoadedBundle;
  try {
    candidate = await readBundle(ctx.candidate);
  } catch (err) {
    throw new UsageError(`--candidate ${ctx.candidate}: ${(err as Error).message}`);
  }
  const runtime = await openRuntime(configSchema.parse({ db }), { models: false });
  let report: CompareReport;
  try {
    if (!(await runtime.store.outcomes.latestModel(ctx.model))) throw new UsageError(`${ctx.db}: the audit log holds no bundle for a model named ${JSON.stringify(ctx.model)}`);
    report = await compareCandidate(runtime.store.outcomes, ctx.model, candidate, { from: ctx.from.getTime(), to: ctx.to.getTime() });
  } catch (err) {
    if (err instanceof IncompatibleBundleError) throw new UsageError(`--candidate ${ctx.candidate}: ${err.message}`);
    throw err;
  } finally {
    await runtime.close();
  }
  for (const [flag, path, text] of [['--json', ctx.json, () => `${JSON.stringify(report, null, 2)}\n`], ['--html', ctx.html, () => renderCompareHtml(report)]] as const) {
    if (path === undefined) continue;
    try {
      await writeFile(path, text());
    } catch (err) {
      throw fileProblem(flag, path, err);
    }
  }
  io.stdout.write(`${formatCompareSummary(report, ctx.candidate)}\n`);
  return report;
}
