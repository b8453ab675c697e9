import type { ModelEntry, ModelRegistry } from '../bundle/registry.js';
import { ScoreOverflowError, modelRef } from '../bundle/scorer.js';
import type { ScoreOutcome, ScoreResponse } from '../contracts/score.js';
import { explainRequested } from './explain.js';
import { type FieldError, ProblemError, pointer } from '../errors.js';
import { uuidv7 } from '../ids.js';
import { LogBackpressureError, LogClosedError, LogWriteError, type RequestLog, type ScoredRow } from '../store/request-log.js';

export interface ScoreItem {
  features: Record<string, number> | number[];
  tags?: Record<string, string> | undefined;
  /** Answer with an explanation too (issue 18); computed for this item only. */
  explain?: boolean | undefined;
}

export interface CallContext {
  /** Id of the HTTP request (the service log's reqId). */
  requestId: string;
  /** Unix ms when the request arrived. */
  receivedAt: number;
  /** Milliseconds since the request arrived, read when the answer is ready. */
  elapsedMs: () => number;
  /** Label of the API key the request came with, stored with its rows; null without keys. */
  keyLabel?: string | null;
  /** Called when the answer is sent although its rows could not be logged (log.on_error "serve"). */
  onUnlogged?: () => void;
}

export interface ScoringService {
  scoreOne(model: string, item: ScoreItem, ctx: CallContext): Promise<ScoreResponse>;
  scoreBatch(model: string, items: ScoreItem[], ctx: CallContext): Promise<ScoreResponse[]>;
}

/** The loaded model of that name, or a 404 problem listing the ones that are loaded. */
export function requireModel(registry: ModelRegistry, name: string): ModelEntry {
  const entry = registry.get(name);
  if (!entry) {
    const known = registry.list().map((e) => e.name);
    throw new ProblemError('unknown-model', `no model named ${JSON.stringify(name)} is loaded; loaded: ${known.length ? known.join(', ') : 'none'}`);
  }
  return entry;
}

/**
 * Puts one item's features into out[offset..] in the bundle's order, or lists what is wrong:
 * by name, exactly the bundle's features; as an array, exactly as many values, in its order.
 */
export function placeFeatures(entry: ModelEntry, item: ScoreItem, at: Array<string | number>, out: Float64Array, offset: number): FieldError[] {
  const names = entry.scorer.featureNames;
  const errors: FieldError[] = [];
  const f = item.features;
  if (Array.isArray(f)) {
    if (f.length !== names.length) {
      errors.push({ pointer: pointer([...at, 'features']), detail: `holds ${f.length} values; ${entry.name} takes ${names.length}, in the order GET /v1/models/${entry.name} lists` });
      return errors;
    }
    for (let j = 0; j < f.length; j++) out[offset + j] = f[j] as number;
    return errors;
  }
  // Own properties only: a feature named "constructor" must not find Object.prototype's.
  for (let j = 0; j < names.length; j++) {
    const name = names[j] as string;
    if (!Object.hasOwn(f, name)) errors.push({ pointer: pointer([...at, 'features', name]), detail: `is missing; ${entry.name} needs all ${names.length} features` });
    else out[offset + j] = f[name] as number;
  }
  const known = entry.scorer.featureIndex;
  for (const key of Object.keys(f)) {
    if (!known.has(key)) errors.push({ pointer: pointer([...at, 'features', key]), detail: `is not a feature of ${entry.name}` });
  }
  return errors;
}

/** Rows scored between two turns of the event loop in a batch. */
export const SCORE_CHUNK_ROWS = 256;

/** At most this many field errors are listed in one answer; the detail gives the full count. */
export const MAX_FIELD_ERRORS = 50;

function toProblem(err: unknown): never {
  if (err instanceof LogBackpressureError) {
    throw new ProblemError('log-backpressure', `${err.message}; nothing of this request was scored or logged`, undefined, { 'retry-after': '1' });
  }
  if (err instanceof LogClosedError) throw new ProblemError('not-ready', 'the service is shutting down; nothing of this request was scored or logged', undefined, {}, err);
  throw new ProblemError('log-unavailable', 'the audit log could not be written, so this answer was withheld; nothing of it is logged', undefined, {}, err);
}

/**
 * Scores and logs. An answer is returned only after its audit rows are committed; a request
 * with any bad item is refused whole, before anything is scored or logged.
 */
/** Told of every answer, for the metrics. */
export interface ScoringObserver {
  /** The label and domain verdict of each answer of one call. */
  scored(model: string, answers: ReadonlyArray<{ label: string; inDomain: boolean }>, latencyMs: number): void;
  /** Answers sent although their rows could not be committed (log.on_error "serve"). */
  unlogged?(model: string, answers: number, err: Error): void;
}

export interface ScoringOptions {
  /** "fail" (default): no answer without its audit rows. "serve": answer, and count what was not logged. */
  onLogError?: 'fail' | 'serve';
}

export function createScoringService(registry: ModelRegistry, log: RequestLog, observer?: ScoringObserver, options: ScoringOptions = {}): ScoringService {
  const serveUnlogged = options.onLogError === 'serve';
  const run = async (name: string, items: ScoreItem[], ctx: CallContext, batch: boolean): Promise<ScoreResponse[]> => {
    const entry = requireModel(registry, name);
    const d = entry.scorer.featureNames.length;
    const x = new Float64Array(items.length * d);
    const errors = items.flatMap((item, i) => placeFeatures(entry, item, batch ? ['items', i] : [], x, i * d));
    if (errors.length > 0) {
      const first = batch ? ` (first at item ${/^#\/items\/(\d+)/.exec(errors[0]?.pointer ?? '')?.[1]})` : '';
      const listed = errors.length > MAX_FIELD_ERRORS ? `; ${errors.length} problems, the first ${MAX_FIELD_ERRORS} listed` : '';
      throw new ProblemError('invalid-request', `the features do not match model ${entry.name}${first}${listed}; nothing was scored`, errors.slice(0, MAX_FIELD_ERRORS));
    }
    // A large batch is scored in chunks with a turn of the event loop between them, so that it
    // does not hold up every other request (and the load-shedding probe) while it runs.
    const outcomes: ScoreOutcome[] = [];
    const K = entry.bundle.file.classes.length;
    // The probabilities as the audit log stores them, straight from the scorer.
    const p = new Float64Array(items.length * K);
    for (let start = 0; start < items.length; start += SCORE_CHUNK_ROWS) {
      if (start > 0) await new Promise((resolve) => setImmediate(resolve));
      const rows = Math.min(SCORE_CHUNK_ROWS, items.length - start);
      try {
        for (const o of entry.scorer.scoreRows(x.subarray(start * d, (start + rows) * d), rows, p.subarray(start * K, (start + rows) * K))) outcomes.push(o);
      } catch (err) {
        if (!(err instanceof ScoreOverflowError)) throw err;
        const at = pointer(batch ? ['items', start + err.row, 'features'] : ['features']);
        throw new ProblemError('invalid-request', 'these values overflow the network; nothing was scored', [{ pointer: at, detail: 'the network gives a non-finite logit for these values' }]);
      }
    }
    // Checked here, not awaited: an answer without explanations pays no extra turn of the event loop.
    const explanations = items.some((item) => item.explain === true) ? await explainRequested(entry.bundle, items, x, outcomes) : null;
    const model = modelRef(entry.bundle);
    const latencyUs = ctx.elapsedMs() * 1000;
    const responses: ScoreResponse[] = [];
    const rows: ScoredRow[] = outcomes.map((o, i) => {
      const requestId = batch ? uuidv7() : ctx.requestId;
      // Only on request: an answer without it costs what it cost before.
      const explanation = explanations?.[i];
      const explained = explanation !== undefined;
      responses.push(explained ? { request_id: requestId, model, ...o, explanation } : { request_id: requestId, model, ...o });
      const tags = items[i]?.tags;
      return {
        requestId,
        batchId: batch ? ctx.requestId : null,
        receivedAt: ctx.receivedAt,
        model,
        features: x.subarray(i * d, i * d + d),
        tags: tags && Object.keys(tags).length > 0 ? tags : null,
        label: o.label,
        probabilities: p.subarray(i * K, i * K + K),
        margin: o.margin,
        inDomain: o.domain.in_domain,
        review: o.review,
        domain: { checks: o.domain.checks, outside: o.domain.outside },
        latencyUs,
        keyLabel: ctx.keyLabel ?? null,
        explained,
      };
    });
    try {
      await log.append(rows);
    } catch (err) {
      // Only a failed commit may be served past: backpressure and shutdown still refuse.
      if (!(serveUnlogged && err instanceof LogWriteError)) toProblem(err);
      observer?.unlogged?.(entry.name, responses.length, err as Error);
      ctx.onUnlogged?.();
    }
    observer?.scored(entry.name, rows, latencyUs / 1000);
    return responses;
  };
  return {
    scoreOne: async (name, item, ctx) => (await run(name, [item], ctx, false))[0] as ScoreResponse,
    scoreBatch: (name, items, ctx) => run(name, items, ctx, true),
  };
}
