import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scoreAction } from '../../src/cli/actions/score.js';
import type { ScoreResponse } from '../../src/contracts/score.js';
import { readBundle } from '../../src/bundle/verify.js';
import { DEMO_FILES, buildDemo } from '../../demo-data/build.js';
import { tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

const committed = (name: string): Buffer => readFileSync(new URL(`../../demo-data/${name}`, import.meta.url));
const tmp = tempDir();
afterAll(() => tmp.remove());
// Training the demo's five fold networks on 5,000 rows: about half a minute alone, several times
// that beside the rest of the suite on two cores.
beforeAll(async () => {
  await buildDemo(tmp.dir);
}, 300_000);

async function scoreTraffic(file: string): Promise<ScoreResponse[]> {
  const out = sink();
  await scoreAction(
    { bundle: new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url).pathname, data: new URL(`../../demo-data/${file}`, import.meta.url).pathname, batchSize: 256 },
    { stdout: out, stderr: sink(), interactive: false },
  );
  return out.text().trim().split('\n').map((l) => JSON.parse(l) as ScoreResponse);
}

describe('demo data and bundle', () => {
  it('rebuild byte for byte from the committed generator (`npm run demo:build`)', () => {
    for (const name of [...Object.keys(DEMO_FILES), 'models/moulding-quality.bundle.json']) {
      expect(readFileSync(join(tmp.dir, name)).equals(committed(name)), name).toBe(true);
    }
  });

  it('describe an injection-moulding cell: ten features with units, five outcomes', async () => {
    const { file } = await readBundle(new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url).pathname);
    expect(file.features).toHaveLength(10);
    expect(file.features.every((f) => f.unit !== '')).toBe(true);
    expect(file.classes).toEqual(['flash', 'good', 'short_shot', 'sink_marks', 'warpage']);
    expect(file.reference.rows).toBe(5000);
  });

  it('normal traffic stays inside the envelope (the rate of the whole flag is tested in test/bundle/domain.test.ts)', async () => {
    const answers = await scoreTraffic('traffic-normal.csv');
    expect(answers).toHaveLength(1000);
    expect(answers.filter((a) => !a.domain.checks.find((c) => c.detector === 'envelope')?.passed).length).toBeLessThanOrEqual(5);
    // Answers name every reading beyond the training range (its 0.1% and 99.9% quantiles): for 10
    // features about 2 x 0.001 x 10 = 2% of ordinary shots; 35 of 1000 is the 99.9% point of Binomial(1000, 0.02) (scipy.stats.binom.ppf).
    expect(answers.filter((a) => a.domain.outside.length > 0).length).toBeLessThanOrEqual(35);
  });

  it('faulted traffic is flagged on every shot, naming the stuck cushion sensor in mm', async () => {
    const answers = await scoreTraffic('traffic-faulted.csv');
    expect(answers.every((a) => !a.domain.in_domain && a.review)).toBe(true);
    for (const a of answers) expect(a.domain.outside).toContainEqual(expect.objectContaining({ feature: 'cushion_mm', value: 0, unit: 'mm' }));
  });
});
