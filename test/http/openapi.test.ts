import { readFileSync } from 'node:fs';
import { Validator } from '@seriousme/openapi-schema-validator';
import { describe, expect, it } from 'vitest';
import { openApiDocument, serializeOpenApi } from '../../src/http/openapi-document.js';

const committedText = readFileSync(new URL('../../openapi/openapi.json', import.meta.url), 'utf8');

describe('openapi/openapi.json', () => {
  it('is what the route schemas generate now (run `npm run openapi` after changing a route)', async () => {
    expect(serializeOpenApi(await openApiDocument())).toBe(committedText);
  });

  it('is a valid OpenAPI 3.1 document (checked by @seriousme/openapi-schema-validator against the published 3.1 schema)', async () => {
    const validator = new Validator();
    const result = await validator.validate(JSON.parse(committedText) as Parameters<Validator["validate"]>[0]);
    expect(result.errors ?? []).toEqual([]);
    expect(result.valid).toBe(true);
    expect(validator.version).toBe('3.1');
  });

  it('describes every route with its body, its answers and its errors', () => {
    const doc = JSON.parse(committedText) as { paths: Record<string, Record<string, { responses: Record<string, unknown>; requestBody?: unknown }>> };
    expect(Object.keys(doc.paths).sort()).toEqual([
      '/healthz',
      '/metrics',
      '/readyz',
      '/v1/alerts',
      '/v1/drift-reports',
      '/v1/drift-reports/{id}',
      '/v1/drift-reports/{id}.html',
      '/v1/models',
      '/v1/models/reload',
      '/v1/models/{name}',
      '/v1/models/{name}/compare',
      '/v1/models/{name}/outcomes-report',
      '/v1/models/{name}/outcomes-report.html',
      '/v1/models/{name}/score',
      '/v1/models/{name}/score-batch',
      '/v1/outcomes',
      '/v1/requests',
      '/v1/requests/{id}/explanation',
    ]);
    const score = doc.paths['/v1/models/{name}/score']!.post!;
    expect(score.requestBody).toBeDefined();
    expect(Object.keys(score.responses).sort()).toEqual(['200', '400', '404', '413', '415', '503', 'default']);
    expect(JSON.stringify(score.responses['400'])).toContain('application/problem+json');
  });

  it('says which routes need an API key: all but health and the documents', () => {
    const doc = JSON.parse(committedText) as { components: { securitySchemes: Record<string, { type: string; scheme: string }> }; paths: Record<string, Record<string, { security?: unknown }>> };
    expect(doc.components.securitySchemes.apiKey).toMatchObject({ type: 'http', scheme: 'bearer' });
    const open = Object.entries(doc.paths).flatMap(([path, ops]) => Object.entries(ops).filter(([, op]) => op.security === undefined).map(([m]) => `${m} ${path}`));
    expect(open.sort()).toEqual(['get /healthz', 'get /readyz']);
  });

  it('says it once per route (a GET and its HEAD twin share one schema object)', () => {
    const doc = JSON.parse(committedText) as { paths: Record<string, Record<string, { description?: string }>> };
    const notes = Object.values(doc.paths).flatMap((ops) => Object.values(ops).map((op) => (op.description ?? '').match(/once keys are in use/g)?.length ?? 0));
    expect(notes.filter((n) => n > 0).length).toBeGreaterThan(5);
    expect(Math.max(...notes)).toBe(1);
  });
});
