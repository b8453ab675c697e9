import { configSchema } from '../config/config.js';
import { openRuntime } from '../runtime.js';
import { VERSION } from '../version.js';
import { buildApp } from './app.js';

/**
 * The OpenAPI document of the routes as declared, with default limits and no models loaded.
 * `npm run openapi` writes it to openapi/openapi.json; a test fails when that file is stale.
 */
export async function openApiDocument(): Promise<unknown> {
  const runtime = await openRuntime(configSchema.parse({ db: ':memory:' }), { models: false });
  const app = await buildApp(runtime, { version: VERSION });
  try {
    await app.ready();
    return app.swagger();
  } finally {
    await app.close();
  }
}

export function serializeOpenApi(doc: unknown): string {
  return `${JSON.stringify(doc, null, 2)}\n`;
}
