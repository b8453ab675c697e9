import { z } from 'zod';
import { modelRefSchema } from './model-ref.js';

// A candidate bundle rescoring a model's logged vectors (docs/outcomes.md#would-a-new-bundle-do-better).

const nullableNumber = z.number().nullable();
const accuracySchema = z.object({ value: nullableNumber, ci_low: nullableNumber, ci_high: nullableNumber }).describe('share right of the labelled rows, Wilson 95% interval');

export const compareReportSchema = z
  .object({
    model: z.string().describe('the model whose logged answers were rescored'),
    current: z.array(modelRefSchema).describe('the bundles that gave the logged answers, as logged'),
    candidate: modelRefSchema,
    window: z.object({ from: z.string(), to: z.string() }).describe('[from, to) of the answers, by when they were received, UTC'),
    created_at: z.string(),
    rows: z.number().int().describe('logged answers rescored'),
    skipped: z.number().int().describe('logged answers left out: their bundle lacks a feature the candidate takes, or the candidate overflows on them'),
    agreement: z.object({ rows: z.number().int(), rate: nullableNumber }).describe('answers where the candidate gives the logged label'),
    labels: z.object({
      current: z.array(z.string()),
      candidate: z.array(z.string()),
      counts: z.array(z.array(z.number().int())).describe('counts[current label][candidate label], in the orders above'),
    }),
    in_domain: z.object({ current: nullableNumber, candidate: nullableNumber }).describe('share of the rescored rows each bundle holds in its training domain'),
    labelled: z.number().int().describe('rescored rows with an outcome'),
    accuracy: z.object({ current: accuracySchema, candidate: accuracySchema }),
    mcnemar: z
      .object({
        current_only: z.number().int().describe('labelled rows the logged answer got right and the candidate wrong'),
        candidate_only: z.number().int().describe('labelled rows the candidate got right and the logged answer wrong'),
        p_value: nullableNumber.describe("McNemar's exact test, two-sided (binomial at 1/2 on the discordant rows); null without labelled rows"),
      })
      .describe('the paired comparison on the labelled rows'),
    findings: z.array(z.string()).describe('plain sentences, worst first'),
  })
  .meta({ id: 'CompareReport' });

export type CompareReport = z.infer<typeof compareReportSchema>;
