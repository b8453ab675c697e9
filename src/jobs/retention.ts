import { Cron } from 'croner';
import type { Logger } from 'pino';
import type { PruneStep, Retention } from '../store/retention.js';

const DAY = 86_400_000;

/** Rows per pruning transaction: small enough that a commit waiting behind one waits milliseconds. */
export const PRUNE_CHUNK_ROWS = 1000;

/**
 * Prunes everything received before `cutoff` in small transactions, yielding to the event loop
 * between them so that scoring keeps its turn. Returns what was removed.
 */
export async function pruneBefore(retention: Retention, cutoff: number, chunkRows = PRUNE_CHUNK_ROWS): Promise<PruneStep & { steps: number }> {
  const total = { scored: 0, rejected: 0, outbox: 0, steps: 0 };
  for (;;) {
    const s = await retention.pruneStep(cutoff, chunkRows);
    total.scored += s.scored;
    total.rejected += s.rejected;
    total.outbox += s.outbox;
    total.steps++;
    if (s.scored < chunkRows && s.rejected < chunkRows && s.outbox < chunkRows) return total;
    await new Promise((resolve) => setImmediate(resolve));
  }
}

export interface RetentionJob {
  /** Prunes now, as a scheduled run would; one pass at a time. */
  runNow(): Promise<void>;
  stop(): Promise<void>;
}

/**
 * The retention job: every night at 03:30 in the reports' time zone (after the nightly reports at
 * their default time), and once at start, rows older than `days` days are pruned.
 */
export function startRetention(deps: {
  retention: Retention;
  days: number;
  timezone: string;
  log: Logger;
  now?: () => number;
  /** With several replicas on one database, one prunes at a time; the others skip that night's pass. */
  exclusively?: (name: string, work: () => Promise<void>) => Promise<boolean>;
}): RetentionJob {
  const now = deps.now ?? Date.now;
  let running: Promise<void> = Promise.resolve();
  const runNow = (): Promise<void> => {
    running = running.then(async () => {
      const cutoff = now() - deps.days * DAY;
      const exclusively = deps.exclusively ?? (async (_name: string, work: () => Promise<void>) => (await work(), true));
      try {
        await exclusively('retention', async () => {
          const r = await pruneBefore(deps.retention, cutoff);
          if (r.scored + r.rejected + r.outbox > 0) {
            deps.log.info({ before: new Date(cutoff).toISOString(), scored: r.scored, rejected: r.rejected, outbox: r.outbox, transactions: r.steps }, 'retention: old rows pruned');
          }
        });
      } catch (err) {
        deps.log.error({ err: (err as Error).message }, 'retention failed; nothing after the last committed step was pruned');
      }
    });
    return running;
  };
  const job = new Cron('30 3 * * *', { timezone: deps.timezone, protect: true }, () => void runNow());
  void runNow();
  return {
    runNow,
    stop: () => {
      job.stop();
      return running;
    },
  };
}
