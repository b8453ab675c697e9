import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { createScorer } from '../../src/bundle/scorer.js';
import { readBundle } from '../../src/bundle/verify.js';

// The fixture holds the answers of the version-1 demo bundle, written by the scorer of the last
// commit that wrote version 1 (test/fixtures/make-v1-scores.ts says which). Numbers in JSON
// round-trip doubles exactly, so toEqual here is a bit-for-bit comparison.
const here = new URL('../fixtures/bundles/', import.meta.url);
const expected = JSON.parse(readFileSync(new URL('moulding-quality-v1.scores.json', here), 'utf8')) as {
  bundle_sha256: string;
  rows: number[][];
  outcomes: unknown[];
};

describe('a plumbline-bundle/1 file', () => {
  it('still loads, and scores every row exactly as the version-1 scorer did, far-away rows included', async () => {
    const bundle = await readBundle(new URL('moulding-quality-v1.bundle.json', here).pathname);
    expect(bundle.file.format).toBe('plumbline-bundle/1');
    expect(bundle.file.sha256).toBe(expected.bundle_sha256);
    const scorer = createScorer(bundle);
    const got = scorer.scoreRows(Float64Array.from(expected.rows.flat()), expected.rows.length);
    expect(got).toHaveLength(165);
    expect(JSON.parse(JSON.stringify(got))).toEqual(expected.outcomes);
    // One by one, as the service scores single requests, gives the same answers.
    for (const r of [0, 100, 164]) expect(JSON.parse(JSON.stringify(scorer.scoreRows(Float64Array.from(expected.rows[r]!), 1)))).toEqual([expected.outcomes[r]]);
  });
});
