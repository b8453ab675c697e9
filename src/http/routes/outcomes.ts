import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import type { Config } from '../../config/config.js';
import { type FieldError, type ProblemCode, type ProblemDocument, ProblemError, pointer, problemDocument } from '../../errors.js';
import type { OutcomeInput, OutcomeRefusal } from '../../store/outcomes-store.js';
import { commonErrors, isoTime, jsonResponse, problemResponse } from '../shared-schemas.js';

// POST /v1/outcomes: what each part turned out to be. Each item is checked on its own, so that
// one bad item is refused with its own problem and the others are recorded; the items that pass
// are recorded in one transaction, so that a crash leaves each either recorded or not.

export function outcomeSchemas(limits: Config['limits']) {
  const item = z
    .strictObject({
      request_id: z.string().min(1).max(64).optional().describe('the request_id of the answer, as scoring returned it'),
      tag: z
        .record(z.string().min(1).max(limits.tag_key_chars), z.string().max(limits.tag_value_chars))
        .refine((t) => Object.keys(t).length >= 1, 'a tag needs at least one key')
        .optional()
        .describe('instead of request_id: tags sent when scoring, every one of which the answer must carry; exactly one answer may match'),
      model: z.string().min(1).max(64).optional().describe('with tag: look only among the answers of this model'),
      label: z.string().min(1).max(64).describe("what the part turned out to be: a class of the answer's model"),
      observed_at: isoTime.optional().describe('when the line found it'),
      // PostgreSQL's text cannot hold NUL; refused on either store, so that both give the same answer.
      source: z
        .string()
        .max(256)
        .refine((v) => !v.includes('\u0000'), 'must not contain the NUL character (U+0000)')
        .optional()
        .describe('where the truth came from: a station, a gauge, a customer return'),
      replace: z.boolean().optional().describe('true: record this label over a different one recorded before'),
    })
    .refine((i) => (i.request_id === undefined) !== (i.tag === undefined), { message: 'give exactly one of request_id and tag', path: ['request_id'] })
    .refine((i) => i.model === undefined || i.tag !== undefined, { message: 'model only narrows a tag; a request id names one answer already', path: ['model'] })
    .describe('one outcome');
  const body = z.strictObject({
    items: z
      .array(z.unknown())
      .min(1, 'a batch needs at least one item')
      .max(limits.batch_items, `a batch holds at most ${limits.batch_items} items (limits.batch_items)`)
      .describe('outcomes, each {request_id | tag (+ model), label, observed_at?, source?, replace?}; each is checked on its own'),
  });
  return { item, body };
}

const itemResultSchema = z.object({
  index: z.number().int().describe('position of the item in the body'),
  request_id: z.string().nullable().describe('the answer the item judges; null when it could not be found'),
  status: z.enum(['recorded', 'unchanged', 'refused']).describe('unchanged: the same label was recorded before'),
  problem: z
    .object({ type: z.string(), title: z.string(), status: z.number().int(), detail: z.string(), errors: z.array(z.object({ pointer: z.string().optional(), detail: z.string() })).optional() })
    .optional()
    .describe('why a refused item was refused (RFC 9457)'),
});

export const outcomesResponseSchema = z
  .object({ recorded: z.number().int().describe('items recorded now'), items: z.array(itemResultSchema) })
  .meta({ id: 'OutcomesResponse' });

const REFUSALS: Record<OutcomeRefusal['reason'], { code: ProblemCode; field: string }> = {
  'unknown-request': { code: 'unknown-request', field: 'request_id' },
  'unknown-tag': { code: 'unknown-tag', field: 'tag' },
  'ambiguous-tag': { code: 'ambiguous-tag', field: 'tag' },
  'not-a-class': { code: 'unknown-label', field: 'label' },
  conflict: { code: 'outcome-conflict', field: 'label' },
};

function refusal(index: number, r: OutcomeRefusal): ProblemDocument {
  const { code, field } = REFUSALS[r.reason];
  return problemDocument(code, r.detail, [{ pointer: pointer(['items', index, field]), detail: r.detail }]);
}

const outcomes: FastifyPluginAsyncZod = async (app) => {
  const { item, body } = outcomeSchemas(app.config.limits);

  app.post(
    '/outcomes',
    {
      config: { access: 'scorer' },
      schema: {
        summary: 'Record what parts turned out to be',
        description:
          'Each item names an answer by request_id, or by a tag it was scored with, and gives the label the part really had. Items are checked one by one: a refused item carries its problem, the others are recorded, all in one transaction. Recording the same label again is `unchanged`; a different one is refused unless the item says `"replace": true`.',
        tags: ['outcomes'],
        body,
        response: {
          200: jsonResponse('one result per item, in order', outcomesResponseSchema),
          400: problemResponse('the body is not {"items": [...]} of 1 to limits.batch_items items'),
          503: problemResponse('the audit log cannot be written now; nothing of the batch was recorded'),
          ...commonErrors,
        },
      },
    },
    async (req) => {
      const inputs: Array<{ index: number; input: OutcomeInput }> = [];
      const results: Array<z.infer<typeof itemResultSchema>> = req.body.items.map((raw, index) => {
        const parsed = item.safeParse(raw);
        if (!parsed.success) {
          const errors: FieldError[] = parsed.error.issues.map((i) => ({ pointer: pointer(['items', index, ...i.path]), detail: i.message }));
          const id = typeof (raw as { request_id?: unknown })?.request_id === 'string' ? ((raw as { request_id: string }).request_id) : null;
          return { index, request_id: id, status: 'refused', problem: problemDocument('invalid-request', `item ${index} has ${errors.length} problem${errors.length === 1 ? '' : 's'}`, errors) };
        }
        const i = parsed.data;
        inputs.push({
          index,
          input: {
            ...(i.request_id !== undefined ? { requestId: i.request_id } : {}),
            ...(i.tag !== undefined ? { tag: i.tag } : {}),
            ...(i.model !== undefined ? { model: i.model } : {}),
            label: i.label,
            observedAt: i.observed_at !== undefined ? Date.parse(i.observed_at) : null,
            source: i.source ?? null,
            replace: i.replace === true,
          },
        });
        return { index, request_id: i.request_id ?? null, status: 'recorded' };
      });
      let verdicts;
      try {
        verdicts = await app.store.outcomes.record(
          inputs.map((x) => x.input),
          req.apiKey?.label ?? null,
        );
      } catch (err) {
        req.log.error({ err }, 'outcomes not recorded');
        throw new ProblemError('outcomes-unavailable', `the audit log could not record the batch (${(err as Error).message}); retry it: items already recorded come back unchanged`, undefined, { 'retry-after': '1' });
      }
      let recorded = 0;
      verdicts.forEach((v, j) => {
        const { index } = inputs[j] as { index: number };
        const out = results[index] as z.infer<typeof itemResultSchema>;
        out.request_id = v.requestId;
        out.status = v.status;
        if (v.status === 'refused') out.problem = refusal(index, v);
        if (v.status === 'recorded') recorded++;
      });
      return { recorded, items: results };
    },
  );
};

export default outcomes;
