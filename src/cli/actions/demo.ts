import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pino } from 'pino';
import { configSchema } from '../../config/config.js';
import { DEMO_DATA_DIR, DEMO_MODEL } from '../../demo/paths.js';
import { INSPECTED_EVERY, recordDemoOutcomes } from '../../demo/outcomes.js';
import { replayDemoDay } from '../../demo/replay.js';
import { outcomesReportFor } from '../../reports/outcomes-report.js';
import type { OutcomesReport } from '../../contracts/outcomes-report.js';
import { type RunningServer, startServer } from '../../http/server.js';
import type { DriftReport } from '../../contracts/drift-report.js';
import type { CliIo } from '../io.js';
import { asListenError } from '../listen-error.js';
import { formatReportSummary } from './drift.js';
import { formatOutcomesSummary } from './outcomes-summary.js';

export interface DemoContext {
  host: string;
  port: number;
  /** Stop after printing instead of serving until Ctrl-C (for scripts). */
  exit: boolean;
  /** Handle SIGTERM/SIGINT/SIGHUP as `serve` does (the command does; tests do not). */
  signals: boolean;
}

export interface DemoResult {
  server: RunningServer;
  report: DriftReport;
  outcomes: OutcomesReport;
  url: string;
  close(): Promise<void>;
}

const DAY = 86_400_000;

/**
 * `plumbline demo`: the whole story in one command. A server on the invented demo bundle with a
 * temporary database; the demo traffic replayed as yesterday's shots; a drift report; and a
 * printed account of what happened, with the address of the report's page.
 */
export async function demoAction(ctx: DemoContext, io: CliIo): Promise<DemoResult> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-demo-'));
  const say = (line = ''): void => void io.stdout.write(`${line}\n`);
  const config = configSchema.parse({ host: ctx.host, port: ctx.port, models_dir: join(DEMO_DATA_DIR, 'models'), db: join(dir, 'demo.db'), logger: { level: 'warn' }, reports: { schedule: 'off' } });
  let server: RunningServer;
  try {
    server = await startServer(config, { logger: pino({ level: 'warn' }, io.stderr), handleSignals: ctx.signals && !ctx.exit });
  } catch (err) {
    rmSync(dir, { recursive: true, force: true });
    throw asListenError(err, ctx.host, ctx.port);
  }
  const close = async (): Promise<void> => {
    await server.close();
    rmSync(dir, { recursive: true, force: true });
  };
  const services = server.runtime;
  const today = Math.floor(Date.now() / DAY) * DAY;
  const dayStart = today - DAY;

  say('plumbline demo: an invented injection-moulding cell (demo-data/README.md tells its story)');
  say(`1. serving the demo bundle "${DEMO_MODEL}" at ${server.url}, audit log in ${config.db}`);
  say(`2. replaying yesterday's shots, ${new Date(dayStart).toISOString().slice(0, 10)}, through the scoring service:`);
  const replay = await replayDemoDay(services.scoring, DEMO_MODEL, DEMO_DATA_DIR, dayStart);
  for (const s of replay.byStretch) {
    say(`   ${String(s.fromHour).padStart(2, '0')}:00-${String(s.toHour).padStart(2, '0')}:00  ${String(s.count).padStart(5)} shots, ${String(s.outOfDomain).padStart(4)} out of domain  (${s.story})`);
  }
  say(`   ${replay.scored} answers, every one committed to the audit log (GET ${server.url}/v1/requests)`);
  say('3. the drift report for that day (what the nightly job makes):');
  const report = await services.reports.run(DEMO_MODEL, { from: dayStart, to: today }, 'demo');
  for (const line of formatReportSummary(report).split('\n')) say(`   ${line}`);
  const inspected = await recordDemoOutcomes(services.store.outcomes, DEMO_MODEL, replay.shots);
  say(`4. the inspection station's results, for every ${INSPECTED_EVERY === 3 ? 'third' : `${INSPECTED_EVERY}th`} shot, 40 minutes after it (as POST /v1/outcomes takes them): ${inspected.recorded} recorded`);
  say('   the outcomes report for that day (how right the answers were):');
  const outcomes = (await outcomesReportFor(services.store.outcomes, DEMO_MODEL, { from: dayStart, to: today })) as OutcomesReport;
  for (const line of formatOutcomesSummary(outcomes).split('\n')) say(`   ${line}`);
  const url = `${server.url}/v1/drift-reports/${report.id}.html`;
  const window = `from=${new Date(dayStart).toISOString()}&to=${new Date(today).toISOString()}`;
  say();
  say(`The report, with its charts: ${url}`);
  say(`How right the answers were, with its charts: ${server.url}/v1/models/${DEMO_MODEL}/outcomes-report.html?${window}`);
  say(`What the stuck sensor looked like to the model: ${server.url}/v1/requests?in_domain=false&limit=3`);
  say(`The API: ${server.url}/api.html`);
  if (ctx.exit) {
    await close();
  } else if (ctx.signals) {
    say('Serving until Ctrl-C; the temporary database is removed on exit.');
    process.once('exit', () => rmSync(dir, { recursive: true, force: true }));
  }
  return { server, report, outcomes, url, close };
}
