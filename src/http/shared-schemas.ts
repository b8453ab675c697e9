import { z } from 'zod';

// Schemas more than one route uses. Each route's own request and response schemas stand beside
// it in routes/; the shapes other layers share are in src/contracts/.

export const problemSchema = z
  .object({
    type: z.string().describe('URI naming the kind of problem: urn:plumbline:problem:<code> (docs/api.md lists the codes)'),
    title: z.string(),
    status: z.number().int(),
    detail: z.string(),
    instance: z.string().optional(),
    errors: z
      .array(
        z.object({
          pointer: z.string().optional().describe('JSON Pointer (RFC 6901, URI fragment form) to the bad part of the body'),
          parameter: z.string().optional().describe('the bad query parameter'),
          header: z.string().optional().describe('the bad header'),
          detail: z.string(),
        }),
      )
      .optional(),
  })
  .meta({ id: 'Problem', description: 'RFC 9457 problem details' });

/** An OpenAPI response entry sent as application/problem+json. */
export function problemResponse(description: string) {
  return { description, content: { 'application/problem+json': { schema: problemSchema } } };
}

/** An OpenAPI response entry sent as application/json. */
export function jsonResponse<T extends z.ZodType>(description: string, schema: T) {
  return { description, content: { 'application/json': { schema } } };
}

/** Every route can also answer with these, as problem+json. */
export const commonErrors = {
  default: problemResponse(
    'any other error: 401 unauthorized (no valid API key, once keys are in use), 403 forbidden (a key of another role), 404 not-found, 405 method-not-allowed (with Allow), 429 rate-limited and 503 overloaded (with Retry-After), 500 internal',
  ),
};

export const modelNameParam = z.object({ name: z.string().min(1, 'a model name is needed').describe('model name, as in the bundle') });

export const isoTime = z.iso.datetime({ offset: true }).describe('ISO 8601 date-time, e.g. 2026-12-01T06:00:00Z');
