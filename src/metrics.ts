import { Counter, Gauge, Histogram, Registry, collectDefaultMetrics } from 'prom-client';

/**
 * The service's metrics in the Prometheus text exposition format (prom-client), names of our own
 * under plumbline_. docs/metrics.md lists them with example alerting expressions.
 */
export interface Metrics {
  registry: Registry;
  scored: Counter<'model' | 'label' | 'in_domain'>;
  rejected: Counter<'model' | 'problem'>;
  unlogged: Counter<'model'>;
  scoreLatency: Histogram<'model'>;
  alertSignal: Gauge<'rule' | 'model'>;
  alertState: Gauge<'rule' | 'model'>;
  driftMaxPsi: Gauge<'model'>;
  outboxDepth: Gauge;
  /** Counts one scored vector: plumbline_scored_total{model, label, in_domain} + 1. */
  countScored(model: string, label: string, inDomain: boolean): void;
}

export function createMetrics(): Metrics {
  const registry = new Registry();
  collectDefaultMetrics({ register: registry, prefix: 'plumbline_' });
  const scored = new Counter({ name: 'plumbline_scored_total', help: 'Vectors scored and committed to the audit log.', labelNames: ['model', 'label', 'in_domain'] as const, registers: [registry] });
  // One child counter per label set, found by a string key: no label object is built per answer.
  // Bounded by models x classes x 2.
  const scoredChildren = new Map<string, { inc(): void }>();
  return {
    registry,
    scored,
    countScored(model, label, inDomain) {
      const key = `${model}\u0000${label}\u0000${inDomain ? 1 : 0}`;
      let child = scoredChildren.get(key);
      if (child === undefined) {
        child = scored.labels(model, label, String(inDomain));
        scoredChildren.set(key, child);
      }
      child.inc();
    },
    rejected: new Counter({ name: 'plumbline_rejected_total', help: 'Requests refused with a problem+json answer, by problem type.', labelNames: ['model', 'problem'], registers: [registry] }),
    unlogged: new Counter({ name: 'plumbline_unlogged_answers_total', help: 'Answers served although their audit rows could not be committed (log.on_error "serve").', labelNames: ['model'], registers: [registry] }),
    scoreLatency: new Histogram({
      name: 'plumbline_score_latency_seconds',
      help: 'Time from receipt of a scoring request to its answer being ready, before the commit.',
      labelNames: ['model'],
      buckets: [0.0005, 0.001, 0.002, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 1],
      registers: [registry],
    }),
    alertSignal: new Gauge({ name: 'plumbline_alert_signal', help: "An alert rule's signal at its last evaluation (NaN when it could not be computed: too few requests, or no loaded bundle to compare with).", labelNames: ['rule', 'model'], registers: [registry] }),
    alertState: new Gauge({ name: 'plumbline_alert_state', help: 'An alert rule: 0 quiet, 1 condition holding, 2 raised.', labelNames: ['rule', 'model'], registers: [registry] }),
    driftMaxPsi: new Gauge({ name: 'plumbline_drift_max_psi', help: 'Largest feature PSI of the newest drift report of a model.', labelNames: ['model'], registers: [registry] }),
    outboxDepth: new Gauge({ name: 'plumbline_outbox_depth', help: 'Webhook deliveries waiting to be sent or retried.', registers: [registry] }),
  };
}
