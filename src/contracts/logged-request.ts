import { z } from 'zod';
import { modelRefSchema } from './model-ref.js';
import { domainCheckSchema, outsideFeatureSchema } from './score.js';

// One row of the audit log as GET /v1/requests returns it.

export const loggedRequestSchema = z
  .object({
    request_id: z.string(),
    batch_id: z.string().nullable(),
    received_at: z.string(),
    model: modelRefSchema,
    features: z.record(z.string(), z.number()),
    tags: z.record(z.string(), z.string()),
    label: z.string(),
    probabilities: z.record(z.string(), z.number()),
    margin: z.number(),
    review: z.boolean(),
    in_domain: z.boolean(),
    domain: z.object({ checks: z.array(domainCheckSchema), outside: z.array(outsideFeatureSchema) }),
    latency_ms: z.number().describe('from receipt to the answer being ready, before the commit'),
    key_label: z.string().nullable().describe('label of the API key the request came with; null when keys were not in use'),
    explained: z.boolean().nullable().describe('whether the answer carried an explanation (GET /v1/requests/{id}/explanation recomputes it); null for answers logged before explanations existed'),
  })
  .meta({ id: 'LoggedRequest' });

export const requestPageSchema = z.object({ items: z.array(loggedRequestSchema), next_cursor: z.string().nullable() });

export type LoggedRequest = z.infer<typeof loggedRequestSchema>;
export type RequestPage = z.infer<typeof requestPageSchema>;
