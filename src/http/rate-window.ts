/**
 * Requests counted per key in fixed windows: the first request of a key opens a window of
 * `windowMs`, and the window's first `max` requests pass. Written here rather than taken from a
 * plugin because it runs inside the one onRequest hook that also checks the key, without an
 * async hook, a cache library or a timer of its own (the plugin cost about 5 µs a request, a
 * sixth of the service's bare request path, measured in bench/http.ts).
 */
export interface RateWindow {
  /** Counts one request of `key` at `now` (Unix ms). */
  take(key: string, now: number): RateVerdict;
  /** Keys with an open window (for tests and bounds). */
  readonly size: number;
}

export interface RateVerdict {
  allowed: boolean;
  limit: number;
  /** Requests the key may still send in this window. */
  remaining: number;
  /** Milliseconds until the window ends. */
  resetMs: number;
}

export function createRateWindow(max: number, windowMs: number, options: { maxKeys?: number } = {}): RateWindow {
  // Counts of many client addresses must not grow without bound (a scan from many addresses):
  // past maxKeys, windows that have ended are dropped, then the oldest opened.
  const maxKeys = options.maxKeys ?? 100_000;
  const windows = new Map<string, { count: number; resetAt: number }>();
  const sweep = (now: number): void => {
    for (const [k, w] of windows) if (w.resetAt <= now) windows.delete(k);
    for (const k of windows.keys()) {
      if (windows.size < maxKeys) break;
      windows.delete(k);
    }
  };
  return {
    take(key, now) {
      let w = windows.get(key);
      if (w === undefined || w.resetAt <= now) {
        if (w !== undefined) windows.delete(key);
        else if (windows.size >= maxKeys) sweep(now);
        w = { count: 0, resetAt: now + windowMs };
        windows.set(key, w);
      }
      w.count++;
      return { allowed: w.count <= max, limit: max, remaining: Math.max(0, max - w.count), resetMs: w.resetAt - now };
    },
    get size() {
      return windows.size;
    },
  };
}
