import { z } from 'zod';
import { explanationSchema } from './explanation.js';
import { modelRefSchema } from './model-ref.js';

// The answer to one scored vector, declared once: the scorer builds it, the routes send it, the
// OpenAPI document describes it, and the audit log reads its parts back. Types are derived.

export const domainCheckSchema = z.object({
  detector: z.string(),
  value: z.number(),
  threshold: z.number(),
  passed: z.boolean().describe('value <= threshold'),
});

export const outsideFeatureSchema = z.object({
  feature: z.string(),
  value: z.number(),
  low: z.number(),
  high: z.number(),
  unit: z.string(),
});

export const scoreDomainSchema = z.object({
  in_domain: z.boolean(),
  checks: z.array(domainCheckSchema),
  outside: z.array(outsideFeatureSchema).describe('features beyond their training range, in their units'),
});

export const scoreResponseSchema = z
  .object({
    request_id: z.string().describe('UUID v7 of this answer in the audit log'),
    model: modelRefSchema,
    label: z.string().describe('the class with the largest probability'),
    probabilities: z.record(z.string(), z.number()).describe('the mean over members of softmax(logits / temperature) per class; they sum to 1'),
    margin: z.number().describe('largest minus second-largest probability'),
    review: z.boolean().describe('out of domain, or margin below the bundle review margin'),
    domain: scoreDomainSchema,
    explanation: explanationSchema.optional().describe('present when the item asked for it with `"explain": true`'),
  })
  .meta({ id: 'ScoreResponse' });

export type DomainCheck = z.infer<typeof domainCheckSchema>;
export type OutsideFeature = z.infer<typeof outsideFeatureSchema>;
export type ScoreResponse = z.infer<typeof scoreResponseSchema>;
/** What one scored row comes to, before it is given a request id. */
export type ScoreOutcome = Omit<ScoreResponse, 'request_id' | 'model' | 'explanation'>;
