import type { FastifyInstance } from 'fastify';
import fp from 'fastify-plugin';
import type { ModelRegistry } from '../../bundle/registry.js';
import type { Config } from '../../config.js';
import type { Metrics } from '../../metrics.js';
import type { ReportService } from '../../reports/service.js';
import type { ScoringService } from '../../scoring/service.js';
import type { ExplanationService } from '../../scoring/explain.js';
import type { Store } from '../../store/store.js';

export interface Services {
  config: Config;
  registry: ModelRegistry;
  store: Store;
  scoring: ScoringService;
  /** Recomputes a logged answer's explanation (GET /v1/requests/{id}/explanation). */
  explanations: ExplanationService;
  reports: ReportService;
  metrics: Metrics;
}

declare module 'fastify' {
  interface FastifyInstance {
    services: Services;
  }
}

/**
 * Makes the services built by the caller available to the routes. The caller owns them: it
 * created them before the app and closes them after it (see server.ts), so that tests can
 * inspect the database a route wrote to.
 */
async function services(app: FastifyInstance, options: { services: Services }): Promise<void> {
  app.decorate('services', options.services);
}

export default fp(services, { name: 'services', fastify: '5.x' });
