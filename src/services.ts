import type { ModelRegistry } from './bundle/registry.js';
import type { Config } from './config.js';
import type { Services } from './http/plugins/services.js';
import { createReportService } from './reports/service.js';
import { createScoringService } from './scoring/service.js';
import type { Store } from './store/store.js';

/** The services the routes call, built once from the configuration, the registry and the store. */
export function createServices(config: Config, registry: ModelRegistry, store: Store, options: { reportWorker?: boolean } = {}): Services {
  return {
    config,
    registry,
    store,
    scoring: createScoringService(registry, store.log),
    reports: createReportService(store, { minRows: config.reports.min_rows, sampleCap: config.reports.sample_cap, seed: 1, worker: options.reportWorker ?? true }),
  };
}
