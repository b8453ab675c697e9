import { describe, expect, it } from 'vitest';
import type { ModelEntry, ModelRegistry } from '../../src/bundle/registry.js';
import { createScorer } from '../../src/bundle/scorer.js';
import { parseBundle } from '../../src/bundle/verify.js';
import { serializeBundle } from '../../src/bundle/write.js';
import { ProblemError } from '../../src/errors.js';
import { SCORE_CHUNK_ROWS, createScoringService } from '../../src/scoring/service.js';
import type { RequestLog, ScoredRow } from '../../src/store/request-log.js';
import { irisBundle } from '../helpers/bundles.js';

const loaded = parseBundle(serializeBundle(irisBundle().bundle), 'iris.bundle.json');
const entry = (b = loaded): ModelEntry => ({ name: 'iris', bundle: b, scorer: createScorer(b), path: 'iris.bundle.json', loadedAt: new Date() });
const registry = (e: ModelEntry): ModelRegistry => ({ dir: '', get: (n) => (n === 'iris' ? e : undefined), list: () => [e], reload: async () => [e] });
/** A log that keeps what it is given, in memory. */
const memoryLog = (): RequestLog & { rows: ScoredRow[] } => {
  const rows: ScoredRow[] = [];
  return { rows, append: async (r: ScoredRow[]) => void rows.push(...r) } as unknown as RequestLog & { rows: ScoredRow[] };
};
const ctx = { requestId: '01a23400-0000-7000-8000-000000000000', receivedAt: 0, elapsedMs: () => 0 };
const SETOSA = [5.1, 3.5, 1.4, 0.2];

describe('scoring service, batches larger than one chunk', () => {
  it(`scores a batch of ${SCORE_CHUNK_ROWS * 2 + 17} items in chunks, every answer in order, and logs them in the same order`, async () => {
    const log = memoryLog();
    const items = Array.from({ length: SCORE_CHUNK_ROWS * 2 + 17 }, (_, i) => ({ features: [SETOSA[0]! + (i % 7) * 0.1, ...SETOSA.slice(1)] }));
    const answers = await createScoringService(registry(entry()), log).scoreBatch('iris', items, ctx);
    expect(answers).toHaveLength(items.length);
    // each answer is the one a single call gives for its own item
    const one = createScorer(loaded);
    answers.forEach((a, i) => expect(a.probabilities).toEqual(one.scoreRows(Float64Array.from(items[i]!.features), 1)[0]!.probabilities));
    expect(log.rows.map((r) => Array.from(r.features))).toEqual(items.map((it) => it.features));
  });

  it('names the item that overflows the network by its index in the whole batch, in a later chunk, and logs nothing', async () => {
    const huge = { ...loaded, members: loaded.members.map((net) => ({ layers: net.layers.map((l, i) => (i < 2 ? { ...l, weights: l.weights.map(() => 1e300) } : l)) })) };
    const log = memoryLog();
    const items = Array.from({ length: SCORE_CHUNK_ROWS + 50 }, (_, i) => ({ features: i === SCORE_CHUNK_ROWS + 20 ? [1e6, 1e6, 1e6, 1e6] : [5, 3, 1, 0.2] }));
    const err = await createScoringService(registry(entry(huge)), log).scoreBatch('iris', items, ctx).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ProblemError);
    expect((err as ProblemError).errors).toEqual([{ pointer: `#/items/${SCORE_CHUNK_ROWS + 20}/features`, detail: 'the network gives a non-finite logit for these values' }]);
    expect(log.rows).toEqual([]);
  });
});
