import { z } from 'zod';
import { modelRefSchema } from './model-ref.js';
import { outcomesReportSchema } from './outcomes-report.js';

// The drift report (docs/drift.md), declared once: the builder makes it, the routes send it, the
// page draws it. Reports stored before a field existed lack it, hence the optional ones.

const nullableNumber = z.number().nullable();
export const psiBandSchema = z.enum(['stable', 'watch', 'shifted']);

export const featureDriftSchema = z.object({
  name: z.string(),
  unit: z.string(),
  n: z.number(),
  mean: nullableNumber,
  reference_mean: z.number(),
  psi: nullableNumber.describe('population stability index on the training decile bins'),
  band: psiBandSchema.nullable().describe('PSI band: < 0.1 stable, 0.1-0.25 watch, >= 0.25 shifted (common practice)'),
  ks: z.object({ d: nullableNumber, p_value: nullableNumber, method: z.enum(['exact', 'asymptotic']).nullable() }).describe('two-sample Kolmogorov-Smirnov against the reference sample'),
  p_adjusted: nullableNumber.describe('Benjamini-Hochberg adjusted KS p-value across features'),
  wasserstein: nullableNumber.describe('Wasserstein-1 distance in training standard deviations'),
  outside_count: z.number().describe('rows with this feature outside its envelope'),
  bins: z.object({ edges: z.array(z.number()), reference: z.array(z.number()), window: z.array(z.number()) }),
});

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
        p_value: nullableNumber.describe('exact binomial test of the out-of-domain count against expected_ci_high (reports made before it existed: against expected_rate)'),
      })
      .describe('share of answers out of domain, 95% Wilson interval, the false-alarm rate measured at calibration, exact one-sided binomial p'),
    features: z.array(featureDriftSchema),
    predictions: z.object({
      fractions: z.record(z.string(), z.number()),
      reference_fractions: z.record(z.string(), z.number()).describe('predicted-class shares on the held-out rows'),
      chi_square: z.object({ statistic: nullableNumber, df: z.number(), p_value: nullableNumber }),
      js_distance: nullableNumber.describe('Jensen-Shannon distance, base 2'),
    }),
    margin: z.object({ mean: nullableNumber, reference_mean: z.number(), ks: z.object({ d: nullableNumber, p_value: nullableNumber }), review_rate: nullableNumber }),
    hourly: z.array(z.object({ hour: z.string(), scored: z.number(), out_of_domain: z.number() })),
    sample: z.object({ rows: z.number(), cap: z.number(), reservoir: z.boolean(), seed: z.number() }),
    outcomes: outcomesReportSchema
      .omit({ model: true, window: true, created_at: true })
      .optional()
      .describe("how right the window's answers were, as the outcomes report says (docs/outcomes.md); present when outcomes of them were recorded by the time the report was made"),
    findings: z.array(z.string()).describe('plain sentences, worst first'),
  })
  .meta({ id: 'DriftReport' });

export type DriftReport = z.infer<typeof driftReportSchema>;
export type FeatureDrift = z.infer<typeof featureDriftSchema>;
