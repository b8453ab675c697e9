import type { Logger } from 'pino';
import type { ModelRegistry } from './bundle/registry.js';
import type { Config } from './config.js';
import type { Services } from './http/plugins/services.js';
import { createMetrics } from './metrics.js';
import type { DriftReport } from './reports/report-types.js';
import { createReportService } from './reports/service.js';
import { createScoringService } from './scoring/service.js';
import { createExplanationService } from './scoring/explain.js';
import type { Store } from './store/store.js';

/** The services the routes call, built once from the configuration, the registry and the store. */
export function createServices(config: Config, registry: ModelRegistry, store: Store, options: { reportWorker?: boolean; log?: Logger } = {}): Services {
  const log = options.log;
  const metrics = createMetrics();
  // The gauges start from what the log already holds.
  for (const e of registry.list()) {
    const psi = maxPsi(store.alerts.latestReport(e.name));
    if (psi !== null) metrics.driftMaxPsi.set({ model: e.name }, psi);
  }
  return {
    config,
    registry,
    store,
    metrics,
    scoring: createScoringService(registry, store.log, {
      scored(model, answers, latencyMs) {
        for (const a of answers) metrics.scored.inc({ model, label: a.label, in_domain: String(a.domain.in_domain) });
        metrics.scoreLatency.observe({ model }, latencyMs / 1000);
      },
      unlogged(model, answers, err) {
        metrics.unlogged.inc({ model }, answers);
        log?.error({ model, answers, err: err.message }, 'answers served without their audit rows (log.on_error is "serve")');
      },
    }, { onLogError: config.log.on_error }),
    explanations: createExplanationService(registry, { getRequest: (id) => store.getRequest(id), bundleText: (name, sha256) => store.drift.bundleText(name, sha256) }),
    reports: createReportService(
      store,
      { minRows: config.reports.min_rows, sampleCap: config.reports.sample_cap, seed: 1, worker: options.reportWorker ?? true },
      (report) => {
        const psi = Math.max(...report.features.map((f) => f.psi ?? Number.NEGATIVE_INFINITY));
        if (Number.isFinite(psi)) metrics.driftMaxPsi.set({ model: report.model.name }, psi);
      },
    ),
  };
}

function maxPsi(reportJson: string | null): number | null {
  if (!reportJson) return null;
  const psis = (JSON.parse(reportJson) as DriftReport).features.map((f) => f.psi).filter((p): p is number => p !== null);
  return psis.length > 0 ? Math.max(...psis) : null;
}
