import { Cron } from 'croner';
import type { Logger } from 'pino';
import type { ModelRegistry } from '../bundle/registry.js';
import type { ReportService } from '../reports/service.js';
import type { DriftStore } from '../store/drift-store.js';

/** [midnight before the day before `at`, midnight before `at`) in the time zone: "yesterday". */
export function previousDayWindow(at: Date, timezone: string): { from: number; to: number } {
  // croner knows the time zone rules; the last two midnights up to and including `at` bound
  // yesterday (+1 ms: a run scheduled at exactly midnight belongs to the day that just began).
  const midnights = new Cron('0 0 * * *', { timezone, paused: true }).previousRuns(2, new Date(at.getTime() + 1));
  const [today, yesterday] = midnights;
  if (!today || !yesterday) throw new Error(`no midnight found before ${at.toISOString()} in ${timezone}`);
  return { from: yesterday.getTime(), to: today.getTime() };
}

export interface NightlyReports {
  /** Runs the reports a scheduled run would have made at `at`, skipping those already stored. */
  runFor(at: Date): Promise<void>;
  /** Stops the schedule and resolves when the pass under way, if any, is done. */
  stop(): Promise<void>;
}

/**
 * The nightly job: at each scheduled time, one drift report per loaded model for the previous day.
 * At start, the most recent scheduled run is made good if its reports are missing (the server was
 * down). Reports are built on worker threads, so scoring never waits for them.
 */
export function startNightlyReports(deps: {
  registry: ModelRegistry;
  reports: ReportService;
  drift: DriftStore;
  schedule: string;
  timezone: string;
  log: Logger;
  /** The clock; tests set it so that what "the last scheduled run" is does not depend on the day they run. */
  now?: () => Date;
}): NightlyReports {
  const { registry, reports, drift, timezone, log } = deps;
  const now = deps.now ?? (() => new Date());
  let running: Promise<void> = Promise.resolve();
  const runFor = (at: Date): Promise<void> => {
    // One pass at a time; a slow pass makes the next one wait rather than run beside it.
    running = running.then(async () => {
      const window = previousDayWindow(at, timezone);
      for (const e of registry.list()) {
        if (drift.hasReport(e.name, window.from, window.to)) continue;
        try {
          const r = await reports.run(e.name, window, 'nightly', e.bundle.file.sha256);
          log.info({ model: e.name, report: r.id, verdict: r.verdict, scored: r.counts.scored, window: r.window }, 'nightly drift report');
        } catch (err) {
          log.error({ model: e.name, err: (err as Error).message }, 'nightly drift report failed');
        }
      }
    });
    return running;
  };
  const job = new Cron(deps.schedule, { timezone, protect: true }, () => void runFor(now()));
  const last = job.previousRuns(1, now())[0];
  if (last) void runFor(last);
  return {
    runFor,
    stop: () => {
      job.stop();
      return running;
    },
  };
}
