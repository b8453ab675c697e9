// The cost of explaining one vector of the demo bundle (issue 18: under 1 ms), beside the cost of
// scoring it, for a shot inside the domain and for the demo's stuck-transducer shot (cushion_mm
// at 0 mm, demo-data/traffic-faulted.csv line 2), whose path crosses more kinks.
//   npx tsx bench/explain.ts [--quick]
import { fileURLToPath } from 'node:url';
import { createExplainer } from '../src/bundle/explainer.js';
import { createScorer } from '../src/bundle/scorer.js';
import { readBundle } from '../src/bundle/verify.js';
import { decodeDomain } from '../src/bundle/domain-codec.js';
import { integratedGradients } from '../src/core/explain/integrated-gradients.js';
import { nearestChanges } from '../src/core/explain/nearest-change.js';
import { servedLogProbability } from '../src/core/explain/targets.js';
import { DEMO_SHOT } from './lib/bundles.js';

export interface ExplainFigure {
  shot: string;
  inDomain: boolean;
  /** Median over rounds, microseconds per call. */
  explainUs: number;
  integratedGradientsUs: number;
  nearestChangesUs: number;
  scoreUs: number;
  breakpoints: number;
  nodes: number;
  rounds: number;
}

const SHOTS: Array<[string, number[]]> = [
  ['in domain (the bench shot)', DEMO_SHOT],
  ['stuck transducer (C3F-000001, cushion 0 mm)', [238.7, 54.2, 911, 471, 3.43, 12.9, 110, 0, 22.28, 48.51]],
];

function microsecondsPerCall(fn: () => void, ms: number): number {
  for (let i = 0; i < 20; i++) fn();
  let n = 0;
  const t = performance.now();
  while (performance.now() - t < ms) {
    fn();
    n++;
  }
  return ((performance.now() - t) * 1000) / n;
}

const median = (v: number[]): number => [...v].sort((a, b) => a - b)[Math.floor(v.length / 2)] as number;

export async function measureExplain(quick = false): Promise<ExplainFigure[]> {
  const bundle = await readBundle(fileURLToPath(new URL('../demo-data/models/moulding-quality.bundle.json', import.meta.url)));
  const scorer = createScorer(bundle);
  const explainer = createExplainer(bundle);
  const { file } = bundle;
  const baseline = file.reference.features.map((f) => f.mean);
  const env = decodeDomain(file).models.envelope;
  const rounds = quick ? 3 : 7;
  const ms = quick ? 200 : 1000;
  return SHOTS.map(([shot, values]) => {
    const x = Float64Array.from(values);
    const o = scorer.scoreRows(x, 1)[0]!;
    const target = servedLogProbability(file.classes.indexOf(o.label), file.classes.length, file.calibration.temperature);
    const ig = () => integratedGradients(bundle.members, baseline, x, target, { steps: 64, preprocess: file.preprocess });
    const once = ig();
    const figures = { explain: [] as number[], ig: [] as number[], nearest: [] as number[], score: [] as number[] };
    for (let r = 0; r < rounds; r++) {
      figures.score.push(microsecondsPerCall(() => scorer.scoreRows(x, 1), ms / 2));
      figures.explain.push(microsecondsPerCall(() => explainer.explain(x, o.label, o.domain.in_domain), ms));
      figures.ig.push(microsecondsPerCall(ig, ms / 2));
      figures.nearest.push(microsecondsPerCall(() => nearestChanges(x, env.low, env.high, explainer.labelOf), ms / 2));
    }
    return {
      shot,
      inDomain: o.domain.in_domain,
      explainUs: median(figures.explain),
      integratedGradientsUs: median(figures.ig),
      nearestChangesUs: median(figures.nearest),
      scoreUs: median(figures.score),
      breakpoints: once.breakpoints,
      nodes: once.nodes,
      rounds,
    };
  });
}

if (process.argv[1]?.endsWith('explain.ts')) {
  for (const f of await measureExplain(process.argv.includes('--quick'))) process.stdout.write(`${JSON.stringify(f)}\n`);
}
