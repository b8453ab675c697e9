// Whether the audit log can be written, as readiness reports it. Taking the write lock and letting
// go (what readiness did before) succeeds on a full disk and on files made immutable, while every
// commit fails (issue 19). So readiness follows what the commits themselves did, and, when they
// failed or none came for a while, a real write: a row of its own committed (write_probe, at most
// once a PROBE_EVERY_MS), which fails where a commit would.

/** The least time between two probe writes, whatever asks (GET /readyz is public). */
export const PROBE_EVERY_MS = 1000;
/** Without a successful commit for this long, readiness writes a probe before saying writable. */
export const QUIET_MS = 5000;

export interface WriteState {
  writable: boolean;
  /** Why not, in a sentence; null when writable. */
  reason: string | null;
}

export interface WriteHealth {
  /** A commit succeeded (null) or failed for a reason of the storage. */
  record(error: string | null, at?: number): void;
  /** For good: the files were replaced under the service (file-identity.ts). */
  fence(reason: string): void;
  fenced(): string | null;
  /** The state now; runs `probe` first when the last writes failed or are old. */
  state(now?: number): WriteState;
}

/** `probe` commits a small write and throws when it cannot. */
export function createWriteHealth(probe: () => void, now: () => number = Date.now): WriteHealth {
  let lastOk = Number.NEGATIVE_INFINITY;
  /** The reason the last write failed; null once one succeeded after it. Unknown until a first write. */
  let failing: string | null = 'nothing has been written yet';
  let probedAt = Number.NEGATIVE_INFINITY;
  let fencedReason: string | null = null;
  const record = (error: string | null, at = now()): void => {
    if (error === null) {
      lastOk = at;
      failing = null;
    } else failing = error;
  };
  return {
    record,
    fence(reason) {
      fencedReason ??= reason;
    },
    fenced: () => fencedReason,
    state(t = now()) {
      if (fencedReason !== null) return { writable: false, reason: fencedReason };
      if ((failing !== null || t - lastOk > QUIET_MS) && t - probedAt >= PROBE_EVERY_MS) {
        probedAt = t;
        try {
          probe();
          record(null, t);
        } catch (err) {
          record(`a test write failed: ${(err as Error).message}`, t);
        }
      }
      return failing !== null ? { writable: false, reason: failing } : { writable: true, reason: null };
    },
  };
}
