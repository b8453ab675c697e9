import type { Logger } from 'pino';
import type { ModelRegistry } from '../bundle/registry.js';
import type { Config } from '../config/config.js';
import type { Metrics } from '../metrics.js';
import type { Store } from '../store/store.js';
import { type AlertPhase, type Evaluator, createEvaluator } from './evaluator.js';
import { type Deliverer, createDeliverer, resolveWebhooks } from './outbox.js';

export interface Alerting {
  evaluator: Evaluator;
  deliverer: Deliverer;
  /** One evaluation and one delivery pass, now: what the timers do. */
  tick(now?: number): Promise<void>;
  stop(): Promise<void>;
}

/** The phases of an alert rule, with the value plumbline_alert_state reports for each. */
export const ALERT_PHASES = { quiet: 0, holding: 1, raised: 2 } as const satisfies Record<AlertPhase, number>;

/**
 * Alerts in the server: rules evaluated every alerts.check_every, deliveries attempted every
 * second (an undelivered one survives restarts in the outbox). Timers are unref'd: they never keep the
 * process alive, and evaluation is a few indexed aggregates, so scoring is not held up.
 */
export function startAlerting(deps: { config: Config; registry: ModelRegistry; store: Store; metrics: Metrics; log: Logger; env: NodeJS.ProcessEnv; timers?: boolean }): Alerting {
  const { config, store, metrics, log } = deps;
  const evaluator = createEvaluator({
    rules: config.alerts.rules,
    registry: deps.registry,
    store: store.alerts,
    outcomes: store.outcomes,
    log,
    onChange: (s) => {
      metrics.alertState.set({ rule: s.rule, model: s.model }, ALERT_PHASES[s.phase]);
      metrics.alertSignal.set({ rule: s.rule, model: s.model }, s.value ?? Number.NaN);
    },
  });
  const d = config.alerts.delivery;
  const deliverer = createDeliverer({ store: store.alerts, webhooks: resolveWebhooks(config.alerts.webhooks, deps.env), policy: { retryBase: d.retry_base, retryCap: d.retry_cap, giveUpAfter: d.give_up_after }, log });
  let stopped = false;
  // The gauge is set on every call, before the passes: a pass may hang on a receiver for its
  // whole timeout, and the depth must not wait for it.
  const countPending = async (): Promise<void> => {
    metrics.outboxDepth.set(await store.alerts.pendingDeliveries());
  };
  const deliver = async (now?: number): Promise<void> => {
    if (stopped) return;
    await countPending();
    await deliverer.tick(now);
    if (!stopped) await countPending();
  };
  // With several replicas on one database, one evaluates the rules at a time (store.coordination);
  // the others only deliver, which the outbox's leases keep to one replica per delivery.
  const tick = async (now?: number): Promise<void> => {
    await store.coordination.exclusively('alert-evaluation', () => evaluator.tick(now));
    await deliver(now);
  };
  const timers: NodeJS.Timeout[] = [];
  if (deps.timers !== false) {
    if (config.alerts.rules.length > 0) timers.push(setInterval(() => void tick().catch((err: unknown) => log.error({ err }, 'alert evaluation failed')), config.alerts.check_every));
    timers.push(setInterval(() => void deliver().catch((err: unknown) => log.error({ err }, 'alert delivery failed')), 1000));
    for (const t of timers) t.unref();
  }
  void countPending().catch((err: unknown) => log.error({ err }, 'the outbox could not be counted'));
  return {
    evaluator,
    deliverer,
    tick,
    async stop() {
      stopped = true;
      for (const t of timers) clearInterval(t);
      // Attempts under way are abandoned, not failed, so that the store can close now.
      await deliverer.stop();
    },
  };
}
