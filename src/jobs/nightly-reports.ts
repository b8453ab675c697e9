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
  /**
   * Runs a pass only where no other replica runs one (store.coordination): with several replicas
   * on one database, one elected replica makes the reports. Without it, every pass runs.
   */
  exclusively?: (name: string, work: () => Promise<void>) => Promise<boolean>;
  /**
   * A replica that was not elected looks again after this long (default a minute), so that the
   * reports are made even when the elected one died before it finished: re-election.
   */
  retryMs?: number;
}): NightlyReports {
  const { registry, reports, drift, timezone, log } = deps;
  const now = deps.now ?? (() => new Date());
  const exclusively = deps.exclusively ?? (async (_name: string, work: () => Promise<void>) => (await work(), true));
  const retryMs = deps.retryMs ?? 60_000;
  let stopped = false;
  const retries = new Set<NodeJS.Timeout>();
  let running: Promise<void> = Promise.resolve();
  const pass = async (at: Date): Promise<void> => {
    const window = previousDayWindow(at, timezone);
    for (const e of registry.list()) {
      try {
        if (await drift.hasReport(e.name, window.from, window.to)) continue;
        const r = await reports.run(e.name, window, 'nightly', e.bundle.file.sha256);
        log.info({ model: e.name, report: r.id, verdict: r.verdict, scored: r.counts.scored, window: r.window }, 'nightly drift report');
      } catch (err) {
        log.error({ model: e.name, err: (err as Error).message }, 'nightly drift report failed');
      }
    }
  };
  const runFor = (at: Date, attempt = 0): Promise<void> => {
    // One pass at a time; a slow pass makes the next one wait rather than run beside it.
    running = running.then(async () => {
      // A retry after stop() does not run; a pass queued before it does, and stop() waits for it.
      if (stopped && attempt > 0) return;
      let elected: boolean;
      try {
        elected = await exclusively('nightly-reports', () => pass(at));
      } catch (err) {
        log.error({ err: (err as Error).message }, 'nightly drift reports could not start');
        elected = false;
      }
      // Another replica holds the job: look again later, until the day's reports exist (a
      // pass that finds them all stored does nothing). A day's worth of tries at most.
      if (!elected && !stopped && attempt < 1440) {
        const t = setTimeout(() => {
          retries.delete(t);
          void runFor(at, attempt + 1);
        }, retryMs);
        t.unref();
        retries.add(t);
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
      stopped = true;
      job.stop();
      for (const t of retries) clearTimeout(t);
      return running;
    },
  };
}
