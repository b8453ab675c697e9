import { z } from 'zod';
import type { Config } from '../config.js';
import { MAX_FEATURE_MAGNITUDE } from '../core/network.js';
import { NOT_WELL_FORMED } from './json-scan.js';

// Request and response schemas, declared once: routes validate with them and the OpenAPI
// document is generated from them.

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
// A lone UTF-16 surrogate (from a "\ud800" escape) has no UTF-8 form: it could not be stored as
// sent. The JSON parser refuses it first (json-body.ts); this keeps the schema saying so too.
const LONE_SURROGATE = /[\ud800-\udbff](?![\udc00-\udfff])|(?<![\ud800-\udbff])[\udc00-\udfff]/;
const wellFormed = (s: string): boolean => !LONE_SURROGATE.test(s);
const WELL_FORMED = NOT_WELL_FORMED;

export const commonErrors = {
  default: problemResponse(
    'any other error: 401 unauthorized (no valid API key, once keys are in use), 403 forbidden (a key of another role), 404 not-found, 405 method-not-allowed (with Allow), 429 rate-limited and 503 overloaded (with Retry-After), 500 internal',
  ),
};

export const modelNameParam = z.object({ name: z.string().min(1, 'a model name is needed').describe('model name, as in the bundle') });

export function scoringSchemas(limits: Config['limits']) {
  const tags = z
    .record(
      z
        .string()
        .min(1, 'a tag key must not be empty')
        .max(limits.tag_key_chars, `a tag key has at most ${limits.tag_key_chars} characters (limits.tag_key_chars)`)
        .regex(/^[^\u0000-\u001f\u007f]+$/, 'a tag key must not hold control characters')
        .refine(wellFormed, WELL_FORMED),
      z.string().max(limits.tag_value_chars, `a tag value has at most ${limits.tag_value_chars} characters (limits.tag_value_chars)`).refine(wellFormed, WELL_FORMED),
    )
    .refine((t) => Object.keys(t).length <= limits.tags, `at most ${limits.tags} tags (limits.tags)`)
    .describe('where the vector came from: line, station, part number ... (stored with the request)');
  const value = z.number().min(-MAX_FEATURE_MAGNITUDE).max(MAX_FEATURE_MAGNITUDE);
  const features = z
    .union([
      z.record(z.string(), value).describe("by name: exactly the bundle's features"),
      z.array(value).describe("in the bundle's feature order"),
    ])
    .describe('feature values in the units the bundle lists; every value a finite number');
  // No registry id: these are built per app from its limits, and ids must be unique.
  const item = z.strictObject({ features, tags: tags.optional() }).describe('one feature vector to score');
  const batch = z
    .strictObject({
      items: z
        .array(item)
        .min(1, 'a batch needs at least one item')
        .max(limits.batch_items, `a batch holds at most ${limits.batch_items} items (limits.batch_items)`),
    })
    .describe('feature vectors to score together');
  return { item, batch };
}

const domainCheck = z.object({
  detector: z.string(),
  value: z.number(),
  threshold: z.number(),
  passed: z.boolean().describe('value <= threshold'),
});

const outsideFeature = z.object({
  feature: z.string(),
  value: z.number(),
  low: z.number(),
  high: z.number(),
  unit: z.string(),
});

export const modelRefSchema = z.object({ name: z.string(), version: z.string(), sha256: z.string() });

export const scoreResponseSchema = z
  .object({
    request_id: z.string().describe('UUID v7 of this answer in the audit log'),
    model: modelRefSchema,
    label: z.string().describe('the class with the largest probability'),
    probabilities: z.record(z.string(), z.number()).describe('softmax(logits / temperature) per class; they sum to 1'),
    margin: z.number().describe('largest minus second-largest probability'),
    review: z.boolean().describe('out of domain, or margin below the bundle review margin'),
    domain: z.object({
      in_domain: z.boolean(),
      checks: z.array(domainCheck),
      outside: z.array(outsideFeature).describe('features outside the training envelope, in their units'),
    }),
  })
  .meta({ id: 'ScoreResponse' });

export const scoreBatchResponseSchema = z
  .object({
    batch_id: z.string().describe('id of this call; the audit log stores it with every item (GET /v1/requests shows it as batch_id)'),
    items: z.array(scoreResponseSchema),
  })
  .meta({ id: 'ScoreBatchResponse' });

export const featureSchemaOut = z.object({ name: z.string(), unit: z.string(), description: z.string() });

export const modelSummarySchema = z
  .object({
    name: z.string(),
    version: z.string(),
    sha256: z.string(),
    features: z.array(featureSchemaOut),
    classes: z.array(z.string()),
    loaded_at: z.string(),
  })
  .meta({ id: 'ModelSummary' });

export const modelDetailSchema = modelSummarySchema
  .extend({
    format: z.string().describe('plumbline-bundle/2, or plumbline-bundle/1 for a bundle written before ensembles'),
    created_at: z.string(),
    file: z.string().describe('the bundle file it was loaded from'),
    members: z
      .array(z.object({ layers: z.array(z.object({ inputs: z.number(), outputs: z.number(), activation: z.string(), alpha: z.number().optional() })) }))
      .describe('the networks that answer together (the mean of their calibrated probabilities); one for version 1 and imported networks'),
    calibration: z.object({ temperature: z.number(), fit: z.string().optional().describe('fitted, separable (left at 1: the held-out rows gave no minimum), flat or not_fitted') }),
    domain: z.object({
      review_margin: z.number(),
      target_in_domain_rate: z.number().describe('share of held-out in-domain rows the flag was asked to pass'),
      held_out: z
        .object({
          source: z.string(),
          rows: z.number(),
          level: z.number().optional().describe('the level calibrated to: the target, or n / (n + 1) where the rows cannot support it'),
          in_domain_rate: z.number(),
          false_alarm_rate: z.number(),
          false_alarm_ci: z.object({ low: z.number(), high: z.number(), confidence: z.number() }).optional().describe('Clopper-Pearson interval of the false-alarm rate'),
        })
        .describe('the calibration rows and the pass rate measured on them, leave-one-out: the baseline false-alarm rate'),
      detectors: z.array(z.object({ detector: z.string(), threshold: z.number() })).describe('the detectors that vote; a check passes when value <= threshold'),
      left_out: z.array(z.object({ detector: z.string(), reason: z.string() })).describe('detectors asked for that do not vote, and why'),
      evaluation: z.record(z.string(), z.unknown()).describe('pass rates on held-out rows, detection rates and AUROC on generated probes'),
      envelope: z.object({
        tolerance: z.number(),
        features: z.array(z.object({ name: z.string(), unit: z.string(), low: z.number(), high: z.number() })),
      }),
    }),
    training: z.object({
      rows: z.record(z.string(), z.number()),
      seed: z.number(),
      options: z.record(z.string(), z.unknown()),
      members: z.array(z.record(z.string(), z.unknown())).describe('per network trained here: rows, epochs, losses'),
      metrics: z.record(z.string(), z.unknown()),
    }),
  })
  .meta({ id: 'ModelDetail' });

const isoTime = z.iso.datetime({ offset: true }).describe('ISO 8601 date-time, e.g. 2026-12-01T06:00:00Z');

export const requestsQuerySchema = z.strictObject({
  // No bundle has a longer model name (64) or class name (64): a longer one is a mistake.
  model: z.string().max(64, 'a model name has at most 64 characters').optional(),
  from: isoTime.optional().describe('inclusive'),
  to: isoTime.optional().describe('exclusive'),
  in_domain: z.enum(['true', 'false']).optional(),
  label: z.string().max(64, 'a class name has at most 64 characters').optional().describe('predicted class'),
  tag: z.union([z.string(), z.array(z.string())]).optional().describe('key:value; repeat to require several'),
  limit: z.coerce.number().int().min(1).max(1000).default(100),
  cursor: z.string().optional().describe('next_cursor of the previous page'),
});

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
    domain: z.object({ checks: z.array(domainCheck), outside: z.array(outsideFeature) }),
    latency_ms: z.number().describe('from receipt to the answer being ready, before the commit'),
    key_label: z.string().nullable().describe('label of the API key the request came with; null when keys were not in use'),
  })
  .meta({ id: 'LoggedRequest' });

export const requestPageSchema = z.object({ items: z.array(loggedRequestSchema), next_cursor: z.string().nullable() });

export const healthSchema = z.object({ status: z.literal('ok') });
export const readySchema = z.object({
  status: z.enum(['ready', 'not ready']),
  models: z.number().int(),
  database: z.enum(['writable', 'not writable']),
  reason: z.string().optional().describe('why the audit log cannot be written, when it cannot: the last commit\'s or test write\'s error'),
});

const nullableNumber = z.number().nullable();
const band = z.enum(['stable', 'watch', 'shifted']);

export const driftReportSchema = z
  .object({
    id: z.string().describe('UUID v7'),
    model: modelRefSchema,
    window: z.object({ from: z.string(), to: z.string() }).describe('[from, to), UTC'),
    created_at: z.string(),
    verdict: z.enum(['stable', 'watch', 'shifted', 'insufficient data']).describe('the worst of the findings'),
    counts: z.object({ scored: z.number(), rejected: z.number(), out_of_domain: z.number(), other_versions: z.number().describe('rows of other bundles of this model, not analysed') }),
    out_of_domain: z
      .object({
        rate: nullableNumber,
        ci_low: nullableNumber,
        ci_high: nullableNumber,
        expected_rate: z.number().describe('false-alarm rate of the bundle on its calibration rows'),
        expected_ci_low: z.number().optional().describe('Clopper-Pearson 95% interval of expected_rate'),
        expected_ci_high: z.number().optional(),
        expected_rows: z.number().optional().describe('calibration rows expected_rate rests on'),
        p_value: nullableNumber.describe('exact binomial test of the out-of-domain count against expected_ci_high'),
      })
      .describe('share of answers out of domain, 95% Wilson interval, the false-alarm rate measured at calibration, exact one-sided binomial p'),
    features: z.array(
      z.object({
        name: z.string(),
        unit: z.string(),
        n: z.number(),
        mean: nullableNumber,
        reference_mean: z.number(),
        psi: nullableNumber.describe('population stability index on the training decile bins'),
        band: band.nullable().describe('PSI band: < 0.1 stable, 0.1-0.25 watch, >= 0.25 shifted (common practice)'),
        ks: z.object({ d: nullableNumber, p_value: nullableNumber, method: z.enum(['exact', 'asymptotic']).nullable() }).describe('two-sample Kolmogorov-Smirnov against the reference sample'),
        p_adjusted: nullableNumber.describe('Benjamini-Hochberg adjusted KS p-value across features'),
        wasserstein: nullableNumber.describe('Wasserstein-1 distance in training standard deviations'),
        outside_count: z.number().describe('rows with this feature outside its envelope'),
        bins: z.object({ edges: z.array(z.number()), reference: z.array(z.number()), window: z.array(z.number()) }),
      }),
    ),
    predictions: z.object({
      fractions: z.record(z.string(), z.number()),
      reference_fractions: z.record(z.string(), z.number()).describe('predicted-class shares on the validation split'),
      chi_square: z.object({ statistic: nullableNumber, df: z.number(), p_value: nullableNumber }),
      js_distance: nullableNumber.describe('Jensen-Shannon distance, base 2'),
    }),
    margin: z.object({ mean: nullableNumber, reference_mean: z.number(), ks: z.object({ d: nullableNumber, p_value: nullableNumber }), review_rate: nullableNumber }),
    hourly: z.array(z.object({ hour: z.string(), scored: z.number(), out_of_domain: z.number() })),
    sample: z.object({ rows: z.number(), cap: z.number(), reservoir: z.boolean(), seed: z.number() }),
    findings: z.array(z.string()).describe('plain sentences, worst first'),
  })
  .meta({ id: 'DriftReport' });

export const reportSummarySchema = z.object({
  id: z.string(),
  model: modelRefSchema,
  window: z.object({ from: z.string(), to: z.string() }),
  created_at: z.string(),
  trigger: z.enum(['nightly', 'request', 'cli', 'demo']),
  verdict: z.string(),
  counts: z.object({ scored: z.number(), rejected: z.number(), out_of_domain: z.number(), other_versions: z.number() }),
});

export const reportListQuerySchema = z.strictObject({
  model: z.string().optional(),
  from: isoTime.optional().describe('windows starting at or after'),
  to: isoTime.optional().describe('windows starting before'),
  limit: z.coerce.number().int().min(1).max(500).default(50),
  cursor: z.string().optional(),
});

export const reportRequestSchema = z.strictObject({
  model: z.string().min(1),
  from: isoTime.describe('inclusive'),
  to: isoTime.describe('exclusive'),
});

export const reportIdParam = z.object({ id: z.string().min(1) });
