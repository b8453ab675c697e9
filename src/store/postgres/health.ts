import type { WriteState } from '../write-health.js';
import { type Pool, ServerError } from './pool.js';

/** Readiness waits this long for the server at most: a load balancer's probe must not hang. */
const PROBE_TIMEOUT_MS = 1000;
const PROBE_EVERY_MS = 1000;
const QUIET_MS = 5000;

/**
 * Whether the audit log can be written, as write-health.ts decides it on SQLite: the outcome of
 * the last commits, and after a failure or a quiet spell a test write of its own (write_probe),
 * at most once a second, given at most PROBE_TIMEOUT_MS.
 */
export function createServerHealth(pool: Pool, url: string, now: () => number = Date.now): {
  record(error: string | null): void;
  state(): Promise<WriteState>;
} {
  let lastOk = Number.NEGATIVE_INFINITY;
  let failure: string | null = null;
  let probing: Promise<WriteState> | null = null;
  let lastProbe = Number.NEGATIVE_INFINITY;
  let probed: WriteState = { writable: false, reason: 'no write has been tried yet' };
  const probe = async (): Promise<WriteState> => {
    let timer: NodeJS.Timeout | undefined;
    try {
      await Promise.race([
        pool.query('INSERT INTO write_probe (id, at) VALUES (1, $1) ON CONFLICT (id) DO UPDATE SET at = excluded.at', [now()]),
        new Promise((_, reject) => {
          timer = setTimeout(() => reject(new Error(`no answer within ${PROBE_TIMEOUT_MS} ms`)), PROBE_TIMEOUT_MS);
        }),
      ]);
      lastOk = now();
      failure = null;
      return { writable: true, reason: null };
    } catch (err) {
      failure = new ServerError(url, err).message;
      return { writable: false, reason: `the audit log cannot be written: ${failure}` };
    } finally {
      clearTimeout(timer);
    }
  };
  return {
    record(error) {
      if (error === null) {
        lastOk = now();
        failure = null;
      } else failure = error;
    },
    async state() {
      const t = now();
      if (failure === null && t - lastOk < QUIET_MS) return { writable: true, reason: null };
      if (t - lastProbe < PROBE_EVERY_MS) return probing ?? probed;
      lastProbe = t;
      probing ??= probe().then((s) => {
        probed = s;
        probing = null;
        return s;
      });
      return probing;
    },
  };
}
