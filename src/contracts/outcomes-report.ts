import { z } from 'zod';
import { modelRefSchema } from './model-ref.js';

// The outcomes report (docs/outcomes.md): how right a model's answers were, once the parts'
// outcomes are known. Declared once: the builder makes it, the route sends it, the page draws it.

const nullableNumber = z.number().nullable();
const shareSchema = z.object({ rows: z.number().int(), accuracy: nullableNumber.describe('share of these rows answered right; null without rows') });

export const outcomesReportSchema = z
  .object({
    model: modelRefSchema,
    window: z.object({ from: z.string(), to: z.string() }).describe('[from, to) of the answers, by when they were received, UTC'),
    created_at: z.string(),
    scored: z.number().int().describe('answers of this bundle in the window'),
    labelled: z.number().int().describe('of them, answers with an outcome recorded'),
    labelled_rate: nullableNumber.describe('labelled / scored; null without answers'),
    accuracy: z.object({ value: nullableNumber, ci_low: nullableNumber, ci_high: nullableNumber }).describe('share of labelled answers whose label was the outcome, with its Wilson 95% interval'),
    classes: z
      .array(z.object({ label: z.string(), precision: nullableNumber, recall: nullableNumber, f1: nullableNumber, rows: z.number().int().describe('labelled rows that really were this class') }))
      .describe('per class; precision is null when the model never answered the class, recall when no part was of it'),
    confusion: z.object({ labels: z.array(z.string()), counts: z.array(z.array(z.number().int())).describe('counts[actual][predicted], in the order of labels') }),
    log_loss: nullableNumber.describe("mean -ln p(outcome), nats; probabilities floored at 2.2e-16"),
    brier: nullableNumber.describe('multi-class Brier score: mean over rows of sum_k (p_k - o_k)^2; 0 best, 2 worst'),
    ece: z.object({
      value: nullableNumber.describe('expected calibration error of the top probability over the bins'),
      bins: z.array(z.object({ low: z.number(), high: z.number(), rows: z.number().int(), confidence: nullableNumber.describe('mean top probability'), accuracy: nullableNumber })),
    }),
    by_domain: z.object({ in_domain: shareSchema, out_of_domain: shareSchema, p_value: nullableNumber.describe("Fisher's exact test, two-sided, of right/wrong against in/out of domain") }),
    by_margin: z.array(z.object({ low: z.number(), high: z.number() }).extend(shareSchema.shape)).describe('margin bands [0, 0.2), [0.2, 0.5), [0.5, 0.8), [0.8, 1]'),
    review: shareSchema.describe('answers marked for review'),
    not_review: shareSchema,
    findings: z.array(z.string()).describe('plain sentences, worst first'),
  })
  .meta({ id: 'OutcomesReport' });

export type OutcomesReport = z.infer<typeof outcomesReportSchema>;
