import { z } from 'zod';
import { modelRefSchema } from './model-ref.js';
import { domainCheckSchema, outsideFeatureSchema } from './score.js';

// One row of the audit log as GET /v1/requests returns it: the logged answer as the store reads
// it, and its outcome (issue 17), which lives in rows of its own and is added beside it.

const loggedAnswerSchema = z
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
  });

export const outcomeRefSchema = z
  .object({
    label: z.string().describe('what the part turned out to be (the newest outcome recorded)'),
    observed_at: z.string().nullable().describe('when the line found it, as it said; null when it did not say'),
  })
  .describe('the outcome recorded for this answer (POST /v1/outcomes); null while none is');

export const loggedRequestSchema = loggedAnswerSchema.extend({ outcome: outcomeRefSchema.nullable() }).meta({ id: 'LoggedRequest' });

export const requestPageSchema = z.object({ items: z.array(loggedRequestSchema), next_cursor: z.string().nullable() });

/** A logged answer as the store reads it, without its outcome. */
export type LoggedRequest = z.infer<typeof loggedAnswerSchema>;
/** A page of logged answers as the store reads it. */
export interface RequestPage {
  items: LoggedRequest[];
  next_cursor: string | null;
}
/** A logged answer with its outcome, as GET /v1/requests answers it. */
export type LoggedRequestWithOutcome = z.infer<typeof loggedRequestSchema>;
