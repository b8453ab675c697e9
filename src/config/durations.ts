/**
 * A duration such as "30s", "15m", "2h" or "1d", in whole milliseconds; null when it is not one,
 * or when it is not a whole number of milliseconds ("0.1ms"). "0s" is 0.
 */
export function parseDuration(text: string): number | null {
  const m = /^(\d+(?:\.\d+)?)(ms|s|m|h|d)$/.exec(text.trim());
  if (!m) return null;
  const unit = { ms: 1, s: 1000, m: 60_000, h: 3_600_000, d: 86_400_000 }[m[2] as 'ms' | 's' | 'm' | 'h' | 'd'];
  const ms = Number(m[1]) * unit;
  const whole = Math.round(ms);
  return Number.isFinite(ms) && Math.abs(ms - whole) < 1e-6 ? whole : null;
}

export function formatDuration(ms: number): string {
  for (const [unit, size] of [
    ['d', 86_400_000],
    ['h', 3_600_000],
    ['m', 60_000],
    ['s', 1000],
  ] as const) {
    if (ms % size === 0) return `${ms / size}${unit}`;
  }
  return `${ms}ms`;
}
