import type { ModelRegistry } from '../bundle/registry.js';
import { configSchema } from '../config/config.js';
import { createServices } from '../services.js';
import { openStore } from '../store/store.js';
import { VERSION } from '../version.js';
import { buildApp } from './app.js';

/**
 * The OpenAPI document of the routes as declared, with default limits and no models loaded.
 * `npm run openapi` writes it to openapi/openapi.json; a test fails when that file is stale.
 */
export async function openApiDocument(): Promise<unknown> {
  const config = configSchema.parse({});
  const store = openStore(':memory:', { sync: 'normal', flushMs: 0, flushRows: 1, queueRows: 1, rejectedRows: 1 });
  const registry: ModelRegistry = { dir: '', get: () => undefined, list: () => [], reload: async () => [] };
  const app = await buildApp(createServices(config, registry, store), { version: VERSION });
  try {
    await app.ready();
    return app.swagger();
  } finally {
    await app.close();
    store.close();
  }
}

export function serializeOpenApi(doc: unknown): string {
  return `${JSON.stringify(doc, null, 2)}\n`;
}
