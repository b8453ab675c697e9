import type { OutcomeVerdict, OutcomesStore } from '../store/outcomes-store.js';
import type { ReplayedShot } from './replay.js';

const MINUTE = 60_000;

/** The invented inspection station: every third shot of the day is taken off the line and inspected (demo-data/README.md). */
export const INSPECTED_EVERY = 3;
/** How long after the shot its inspection result is known. */
export const INSPECTION_DELAY_MS = 40 * MINUTE;

/**
 * Records the inspection results of the demo day: for every INSPECTED_EVERY-th shot, the class the
 * invented data says the part was, named by the shot tag the line scored it with, as the line's
 * app would send them to POST /v1/outcomes (in batches of 500).
 */
export async function recordDemoOutcomes(outcomes: Pick<OutcomesStore, 'record'>, model: string, shots: readonly ReplayedShot[]): Promise<{ sent: number; recorded: number; refused: number }> {
  const inspected = shots.filter((_, i) => i % INSPECTED_EVERY === INSPECTED_EVERY - 1);
  const verdicts: OutcomeVerdict[] = [];
  for (let i = 0; i < inspected.length; i += 500) {
    const batch = inspected.slice(i, i + 500).map((s) => ({ tag: { shot: s.shot }, model, label: s.outcome, observedAt: s.receivedAt + INSPECTION_DELAY_MS, source: 'inspection station, cell 3', replace: false }));
    verdicts.push(...(await outcomes.record(batch, null)));
  }
  return { sent: inspected.length, recorded: verdicts.filter((v) => v.status === 'recorded').length, refused: verdicts.filter((v) => v.status === 'refused').length };
}
