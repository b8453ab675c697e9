import { decodeDomain } from './domain-codec.js';
import { ensembleProbabilitiesInto } from '../core/ensemble.js';
import { integratedGradients } from '../core/explain/integrated-gradients.js';
import { DEFAULT_NEAREST_CHANGE, type LabelFunction, nearestChanges } from '../core/explain/nearest-change.js';
import { servedLogProbability } from '../core/explain/targets.js';
import type { ForwardPass } from '../core/network.js';
import { topTwo } from '../core/softmax.js';
import { standardizeInto } from '../core/standardize.js';
import { createFastForwardPass } from '../core/wasm/forward-pass.js';
import type { LoadedBundle } from './verify.js';
import type { Contribution, Explanation, NearestChangeOut } from '../contracts/explanation.js';

export type { Explanation } from '../contracts/explanation.js';

/** Gauss-Legendre nodes of the path integral (src/core/explain/integrated-gradients.ts). */
export const EXPLAIN_STEPS = 64;

export interface Explainer {
  /**
   * Explains the answer `label` for one vector in the bundle's units. `inDomain` is the answer's
   * domain flag: an explanation of an answer out of domain describes the network's
   * extrapolation, and says so.
   */
  explain(x: ArrayLike<number>, label: string, inDomain: boolean): Explanation;
  /** The label the served model gives each row, exactly as the scorer would. */
  labelOf: LabelFunction;
}

const cache = new WeakMap<LoadedBundle, Explainer>();

/** The explainer of a bundle, made once per loaded bundle (it holds forward passes and buffers). */
export function explainerFor(bundle: LoadedBundle): Explainer {
  let e = cache.get(bundle);
  if (!e) {
    e = createExplainer(bundle);
    cache.set(bundle, e);
  }
  return e;
}

/**
 * Integrated gradients of log p(label) under the served model (every member's softmax at the
 * bundle temperature, averaged), from the training mean (the reference section's per-feature
 * means) to the vector, in the standardised space the networks read and reported per feature in
 * log-probability units (nats); and, per feature, the nearest change within the training envelope
 * (the domain section's envelope low/high, either format) that changes the label.
 */
export function createExplainer(bundle: LoadedBundle): Explainer {
  const { file } = bundle;
  const d = file.features.length;
  const K = file.classes.length;
  const temperature = file.calibration.temperature;
  const envelope = decodeDomain(file).models.envelope;
  const baseline = Float64Array.from(file.reference.features.map((f) => f.mean));
  const passes: ForwardPass[] = bundle.members.map((net) => createFastForwardPass(net));
  let z = new Float64Array(0);
  let p = new Float64Array(0);
  let memberP: Float64Array[] = [];

  // The scorer's arithmetic, step for step (standardise, forward, mean of the calibrated softmax,
  // first maximum), so that a label found here is the label an answer would carry.
  const labelOf: LabelFunction = (x, rows, gap) => {
    if (z.length < rows * d) z = new Float64Array(rows * d);
    if (p.length < rows * K) {
      p = new Float64Array(rows * K);
      memberP = bundle.members.map(() => new Float64Array(rows * K));
    }
    standardizeInto(file.preprocess, x, rows, z);
    const logits = passes.map((pass) => pass.run(z, rows).logits);
    ensembleProbabilitiesInto(logits, rows, K, temperature, memberP, p);
    const out = new Int32Array(rows);
    for (let r = 0; r < rows; r++) {
      const top = topTwo(p, r * K, K);
      out[r] = top.index;
      if (gap) {
        // The lead of label gap.of in probability: its own minus the largest other.
        const of = gap.of < 0 ? top.index : gap.of;
        let best = Number.NEGATIVE_INFINITY;
        for (let c = 0; c < K; c++) if (c !== of && (p[r * K + c] as number) > best) best = p[r * K + c] as number;
        gap.into[r] = (p[r * K + of] as number) - best;
      }
    }
    return out;
  };

  return {
    labelOf,
    explain(x, label, inDomain) {
      const c = file.classes.indexOf(label);
      if (c < 0) throw new Error(`${label} is not a class of ${file.name}`);
      const ig = integratedGradients(bundle.members, baseline, x, servedLogProbability(c, K, temperature), { steps: EXPLAIN_STEPS, preprocess: file.preprocess });
      const contributions: Contribution[] = file.features.map((f, j) => ({
        feature: f.name,
        unit: f.unit,
        value: x[j] as number,
        baseline: baseline[j] as number,
        contribution: ig.contributions[j] as number,
      }));
      contributions.sort((a, b) => Math.abs(b.contribution) - Math.abs(a.contribution));
      const changes = nearestChanges(x, envelope.low, envelope.high, labelOf, DEFAULT_NEAREST_CHANGE).map((n) => {
        const f = file.features[n.feature] as { name: string; unit: string };
        return { feature: f.name, unit: f.unit, from: n.from, to: n.to, change: n.to - n.from, label: file.classes[n.label] as string, share: Math.abs(n.to - n.from) / ((envelope.high[n.feature] as number) - (envelope.low[n.feature] as number)) };
      });
      // Nearest first, measured as a share of each feature's envelope: units differ between features.
      changes.sort((a, b) => a.share - b.share);
      return {
        method: 'integrated_gradients',
        of: label,
        baseline: 'training_mean',
        steps: EXPLAIN_STEPS,
        total: ig.total,
        completeness_error: ig.completenessError,
        contributions,
        nearest_changes: changes.map(({ share: _share, ...rest }) => rest),
        extrapolated: !inDomain,
      };
    },
  };
}
