import { explainerFor } from '../bundle/explainer.js';
import type { Explanation, RecomputedExplanation } from '../contracts/explanation.js';
import type { ScoreOutcome } from '../contracts/score.js';
import { type LoadedBundle, parseBundle } from '../bundle/verify.js';
import type { ModelRegistry } from '../bundle/registry.js';
import { ProblemError } from '../errors.js';
import type { LoggedRequest } from '../contracts/logged-request.js';

/** The explanation of one scored vector's answer (raw units, the bundle's feature order). */
export function explainOutcome(bundle: LoadedBundle, x: ArrayLike<number>, outcome: ScoreOutcome): Explanation {
  return explainerFor(bundle).explain(x, outcome.label, outcome.domain.in_domain);
}

/** Milliseconds of explaining between two turns of the event loop. */
const EXPLAIN_SLICE_MS = 10;

/**
 * The explanations the items asked for (undefined for the others), or null when none asked: the
 * answers without one take no other step. An explanation costs milliseconds, far more than a score,
 * so a batch that asks for many yields the event loop every EXPLAIN_SLICE_MS, and the other
 * requests (and the load-shedding probe) are not held up while it runs.
 */
export async function explainRequested(bundle: LoadedBundle, items: ReadonlyArray<{ explain?: boolean | undefined }>, x: Float64Array, outcomes: readonly ScoreOutcome[]): Promise<Array<Explanation | undefined> | null> {
  if (!items.some((item) => item.explain === true)) return null;
  const d = bundle.file.features.length;
  const out: Array<Explanation | undefined> = new Array(items.length);
  let since = performance.now();
  for (let i = 0; i < items.length; i++) {
    if (items[i]?.explain !== true) continue;
    if (performance.now() - since > EXPLAIN_SLICE_MS) {
      await new Promise((resolve) => setImmediate(resolve));
      since = performance.now();
    }
    out[i] = explainOutcome(bundle, x.subarray(i * d, i * d + d), outcomes[i] as ScoreOutcome);
  }
  return out;
}

export interface ExplanationSource {
  getRequest(requestId: string): LoggedRequest | null | Promise<LoggedRequest | null>;
  /** The sealed bundle text stored with the model row (src/store/drift-store.ts). */
  bundleText(name: string, sha256: string): { sha256: string; text: string } | null | Promise<{ sha256: string; text: string } | null>;
}

export interface ExplanationService {
  recompute(requestId: string): Promise<RecomputedExplanation>;
}

/**
 * Recomputes a logged answer's explanation from its row and the bundle that gave it: the loaded
 * bundle when its sha256 matches, else the copy the store kept of it. The computation is
 * deterministic, so this is the explanation the answer carried, or would have carried.
 */
export function createExplanationService(registry: ModelRegistry, source: ExplanationSource): ExplanationService {
  const stored = new Map<string, LoadedBundle>();
  const bundleOf = async (row: LoggedRequest): Promise<LoadedBundle> => {
    const loaded = registry.get(row.model.name);
    if (loaded && loaded.bundle.file.sha256 === row.model.sha256) return loaded.bundle;
    const hit = stored.get(row.model.sha256);
    if (hit) return hit;
    const text = await source.bundleText(row.model.name, row.model.sha256);
    if (!text) {
      throw new ProblemError('not-found', `request ${row.request_id} was answered by ${row.model.name} ${row.model.version} (sha256 ${row.model.sha256}), which is not loaded and whose bundle the audit log does not hold`);
    }
    const bundle = parseBundle(text.text, `the stored copy of ${row.model.name} ${row.model.version}`);
    // Keep a few: each holds its networks and forward passes.
    if (stored.size >= 8) stored.delete(stored.keys().next().value as string);
    stored.set(row.model.sha256, bundle);
    return bundle;
  };
  return {
    async recompute(requestId) {
      const row = await source.getRequest(requestId);
      if (!row) throw new ProblemError('not-found', `no scored request with id ${JSON.stringify(requestId)} is in the audit log`);
      const bundle = await bundleOf(row);
      const x = bundle.file.features.map((f) => row.features[f.name] as number);
      return {
        request_id: row.request_id,
        model: row.model,
        label: row.label,
        in_domain: row.in_domain,
        explained: row.explained,
        explanation: explainerFor(bundle).explain(x, row.label, row.in_domain),
      };
    },
  };
}
