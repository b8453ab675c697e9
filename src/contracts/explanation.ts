import { z } from 'zod';
import { modelRefSchema } from './model-ref.js';

// The explanation an answer carries when asked (docs/api.md, "Explanations"), declared once: the
// explainer builds it, the answer and the recompute route send it.

export const explanationSchema = z
  .object({
    method: z.literal('integrated_gradients').describe('Sundararajan, Taly and Yan 2017'),
    of: z.string().describe('the class explained: the answer\'s label'),
    baseline: z.literal('training_mean').describe('the path starts at the training rows\' mean of every feature'),
    steps: z.number().int().describe('Gauss-Legendre nodes of the path integral, before the path is cut at the kinks of relu-like units'),
    total: z.number().describe('sum of the contributions, in nats of log p(label)'),
    completeness_error: z.number().describe('total - (log p(x) - log p(baseline)); at most 1e-3 max(1, |total|)'),
    contributions: z
      .array(
        z.object({
          feature: z.string(),
          unit: z.string(),
          value: z.number().describe('the vector\'s value, in the unit'),
          baseline: z.number().describe('the training mean, in the unit'),
          contribution: z.number().describe('share of log p(label) - log p(label at the baseline), in nats'),
        }),
      )
      .describe('one per feature, largest magnitude first'),
    nearest_changes: z
      .array(
        z.object({
          feature: z.string(),
          unit: z.string(),
          from: z.number(),
          to: z.number().describe('the first value, inside the training envelope, at which the label changes (to 1e-6 of the envelope)'),
          change: z.number().describe('to - from, in the unit'),
          label: z.string().describe('the label at `to`'),
        }),
      )
      .describe('per feature changed alone, the smallest change within its training envelope that changes the label; features with none are left out; nearest (as a share of the envelope) first'),
    extrapolated: z.boolean().describe('the answer is out of domain: this explains the network\'s extrapolation, not the process'),
  })
  .meta({ id: 'Explanation' });

/** A logged answer's explanation, recomputed from its row and the bundle that gave it. */
export const recomputedExplanationSchema = z
  .object({
    request_id: z.string(),
    model: modelRefSchema,
    label: z.string(),
    in_domain: z.boolean(),
    explained: z.boolean().nullable().describe('whether the answer carried an explanation; null for answers logged before explanations existed'),
    explanation: explanationSchema,
  })
  .meta({ id: 'RecomputedExplanation' });

export type Explanation = z.infer<typeof explanationSchema>;
export type RecomputedExplanation = z.infer<typeof recomputedExplanationSchema>;
export type Contribution = Explanation['contributions'][number];
export type NearestChangeOut = Explanation['nearest_changes'][number];
