// The one place that reads the process environment; everything else takes values as arguments.

/**
 * The build time for reproducible artefacts: SOURCE_DATE_EPOCH (seconds since the epoch, see
 * reproducible-builds.org/specs/source-date-epoch) when set, else now.
 */
export function buildTime(env: NodeJS.ProcessEnv = process.env, now: () => Date = () => new Date()): Date {
  const raw = env.SOURCE_DATE_EPOCH;
  if (raw === undefined || raw === '') return now();
  if (!/^\d{1,12}$/.test(raw)) throw new RangeError(`SOURCE_DATE_EPOCH must be whole seconds since 1970, got ${JSON.stringify(raw)}`);
  return new Date(Number(raw) * 1000);
}
