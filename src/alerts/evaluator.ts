import { falseAlarmBaseline } from '../bundle/baseline.js';
import type { Logger } from 'pino';
import type { ModelRegistry } from '../bundle/registry.js';
import { uuidv7 } from '../ids.js';
import type { AlertRow, AlertsStore, NewDelivery } from '../store/alerts-store.js';
import type { OutcomesStore } from '../store/outcomes-store.js';
import { type AlertEventType, type AlertFacts, alertEvent, describeAlert } from './cloudevents.js';
import { formatDuration } from '../config/durations.js';
import type { AlertRule } from '../config/alert-rules.js';
import { computeSignal } from './signals.js';

export type AlertPhase = 'quiet' | 'holding' | 'raised';

export interface AlertState {
  rule: string;
  model: string;
  phase: AlertPhase;
  /** The signal at the last evaluation; null when too few requests were logged to say. */
  value: number | null;
  threshold: number | null;
  requests: number;
  alertId: string | null;
}

interface Track {
  phase: AlertPhase;
  since: number;
  /** While raised: since when the condition has been false. */
  clearSince: number | null;
  alertId: string | null;
  raisedAt: number | null;
  value: number | null;
  threshold: number | null;
  requests: number;
}

export interface Evaluator {
  /**
   * Evaluates every rule for every model it applies to, raising and clearing alerts. Starts from
   * the alerts the store holds open, which another replica may have raised or cleared since.
   */
  tick(now?: number): Promise<void>;
  states(): AlertState[];
}

/**
 * The alert rules' state machine. A condition must hold for `sustain` before an alert is raised,
 * and an alert clears only after the condition has been false for one whole window, so that a
 * signal hovering at its threshold does not flap. Too few requests (min_requests) neither raise
 * nor clear. Raises and clears are stored with their webhook deliveries in one transaction.
 */
export function createEvaluator(deps: { rules: AlertRule[]; registry: ModelRegistry; store: AlertsStore; outcomes?: Pick<OutcomesStore, 'windowOutcomes'>; log: Logger; onChange?: (s: AlertState) => void }): Evaluator {
  const { rules, registry, store, log } = deps;
  const tracks = new Map<string, Track>();
  const key = (rule: string, model: string): string => `${rule}\u0000${model}`;
  /**
   * A restart keeps raised alerts raised, so that recovery is announced and nothing twice; with
   * several replicas the one evaluating now takes over what another raised or cleared.
   */
  const syncOpen = (open: AlertRow[]): void => {
    const raised = new Set<string>();
    for (const a of open) {
      const k = key(a.rule, a.model_name);
      raised.add(k);
      const t = tracks.get(k);
      if (t?.phase === 'raised' && t.alertId === a.id) continue;
      tracks.set(k, { phase: 'raised', since: a.raised_at, clearSince: null, alertId: a.id, raisedAt: a.raised_at, value: a.raised_value, threshold: a.threshold, requests: 0 });
    }
    for (const [k, t] of tracks) if (t.phase === 'raised' && !raised.has(k)) Object.assign(t, { phase: 'quiet', alertId: null, raisedAt: null, clearSince: null });
  };
  // SQLite answers at once: the states are there before the first tick.
  const first = store.openAlerts();
  if (Array.isArray(first)) syncOpen(first);

  const deliveries = (rule: AlertRule, model: string, type: AlertEventType, at: number, facts: AlertFacts): NewDelivery[] => {
    const eventId = uuidv7(at);
    const body = alertEvent(eventId, type, at, facts);
    return rule.notify.map((webhook) => ({ eventId, webhook, orderingKey: key(rule.name, model), body }));
  };

  const thresholdFor = (rule: AlertRule, model: string): number | null => {
    if (rule.above !== undefined) return rule.above;
    if (rule.below !== undefined) return rule.below;
    const entry = registry.get(model);
    // The top of the baseline's 95% interval: a rate measured on a few hundred rows is known no better.
    return entry && rule.above_expected !== undefined ? rule.above_expected * falseAlarmBaseline(entry.bundle.file).high : null;
  };

  const evaluate = async (rule: AlertRule, model: string, now: number): Promise<void> => {
    const k = key(rule.name, model);
    const t = tracks.get(k) ?? { phase: 'quiet', since: now, clearSince: null, alertId: null, raisedAt: null, value: null, threshold: null, requests: 0 };
    tracks.set(k, t);
    const direction = rule.below !== undefined ? 'below' : 'above';
    const threshold = thresholdFor(rule, model);
    const signal = await computeSignal(store, rule, model, now, deps.outcomes);
    t.requests = signal?.requests ?? 0;
    t.threshold = threshold;
    // For accuracy the count is of answers with an outcome, held to min_labelled.
    const enough = signal !== null && signal.requests >= (rule.signal === 'accuracy' ? rule.min_labelled : rule.min_requests) && threshold !== null;
    t.value = enough ? signal.value : null;
    if (!enough) {
      if (t.phase === 'holding') t.phase = 'quiet';
      return;
    }
    const holds = direction === 'above' ? signal.value > threshold : signal.value < threshold;
    const facts = (alertId: string, raisedAt: number, clearedAt: number | null): AlertFacts => {
      const f = { signal: rule.signal, value: signal.value, direction, threshold, window: formatDuration(rule.window), model } as const;
      return { alert_id: alertId, rule: rule.name, ...f, raised_at: new Date(raisedAt).toISOString(), cleared_at: clearedAt === null ? null : new Date(clearedAt).toISOString(), message: describeAlert(f, clearedAt !== null) };
    };
    if (holds) {
      t.clearSince = null;
      if (t.phase === 'quiet') {
        t.phase = 'holding';
        t.since = now;
      }
      if (t.phase === 'holding' && now - t.since >= rule.sustain) {
        const id = uuidv7(now);
        await store.raise(
          { id, rule: rule.name, model_name: model, signal: rule.signal, direction, threshold, window_ms: rule.window, raised_value: signal.value, raised_at: now },
          deliveries(rule, model, 'plumbline.alert.raised', now, facts(id, now, null)),
          now,
        );
        Object.assign(t, { phase: 'raised', since: now, alertId: id, raisedAt: now });
        log.warn({ alert: id, rule: rule.name, model, signal: rule.signal, value: signal.value, threshold }, 'alert raised');
      }
      return;
    }
    if (t.phase === 'holding') t.phase = 'quiet';
    if (t.phase === 'raised' && t.alertId !== null) {
      t.clearSince ??= now;
      if (now - t.clearSince >= rule.window) {
        await store.clear(t.alertId, signal.value, now, deliveries(rule, model, 'plumbline.alert.cleared', now, facts(t.alertId, t.raisedAt ?? now, now)));
        log.info({ alert: t.alertId, rule: rule.name, model, value: signal.value }, 'alert cleared');
        Object.assign(t, { phase: 'quiet', since: now, alertId: null, raisedAt: null, clearSince: null });
      }
    }
  };

  return {
    async tick(now = Date.now()) {
      syncOpen(await store.openAlerts());
      for (const rule of rules) {
        const models = rule.model === '*' ? registry.list().map((e) => e.name) : [rule.model];
        for (const model of models) {
          try {
            await evaluate(rule, model, now);
          } catch (err) {
            log.error({ rule: rule.name, model, err: (err as Error).message }, 'alert rule could not be evaluated');
          }
          deps.onChange?.(stateOf(rule.name, model));
        }
      }
    },
    states: () => [...tracks.keys()].map((k) => stateOf(...(k.split('\u0000') as [string, string]))),
  };

  function stateOf(rule: string, model: string): AlertState {
    const t = tracks.get(key(rule, model));
    return { rule, model, phase: t?.phase ?? 'quiet', value: t?.value ?? null, threshold: t?.threshold ?? null, requests: t?.requests ?? 0, alertId: t?.alertId ?? null };
  }
}
