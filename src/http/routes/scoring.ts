import { type FastifyPluginAsyncZod, serializerCompiler } from 'fastify-type-provider-zod';
import type { FastifySerializerCompiler } from 'fastify/types/schema.js';
import type { CallContext } from '../../scoring/service.js';
import type { FastifyReply, FastifyRequest } from 'fastify';
import { z } from 'zod';
import type { Config } from '../../config/config.js';
import { scoreResponseSchema } from '../../contracts/score.js';
import { MAX_FEATURE_MAGNITUDE } from '../../core/network.js';
import { LONE_SURROGATE, NOT_WELL_FORMED } from '../json-scan.js';
import { commonErrors, jsonResponse, modelNameParam, problemResponse } from '../shared-schemas.js';

// The JSON parser refuses a lone surrogate first (json-scan.ts); this keeps the schema saying so too.
const wellFormed = (s: string): boolean => !LONE_SURROGATE.test(s);
const WELL_FORMED = NOT_WELL_FORMED;

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
  const explain = z.boolean().optional().describe('true: the answer also carries `explanation` (why this label, and the nearest change per feature that would change it)');
  const item = z.strictObject({ features, tags: tags.optional(), explain }).describe('one feature vector to score');
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

export const scoreBatchResponseSchema = z
  .object({
    batch_id: z.string().describe('id of this call; the audit log stores it with every item (GET /v1/requests shows it as batch_id)'),
    items: z.array(scoreResponseSchema),
  })
  .meta({ id: 'ScoreBatchResponse' });

/** Sent with an answer whose rows could not be logged (log.on_error "serve"). */
export const UNLOGGED_HEADER = 'plumbline-audit';

function context(req: FastifyRequest, reply: FastifyReply): CallContext {
  return {
    requestId: req.id,
    receivedAt: Math.round(Date.now() - reply.elapsedTime),
    elapsedMs: () => reply.elapsedTime,
    keyLabel: req.apiKey?.label ?? null,
    onUnlogged: () => void reply.header(UNLOGGED_HEADER, 'not-logged'),
  };
}

const errors = {
  400: problemResponse('the body does not fit the model; `errors` names each bad field'),
  404: problemResponse('no model of that name is loaded'),
  413: problemResponse('the body is larger than limits.body_bytes'),
  415: problemResponse('the body is not application/json'),
  503: problemResponse('the audit log cannot take the rows now; nothing was scored (see Retry-After)'),
  ...commonErrors,
};

/**
 * Scoring answers are built by the scorer to their response schema (test/http/scoring.test.ts
 * checks them against it); a 200 goes out with JSON.stringify rather than a zod encode of every
 * answer, the hottest path of the service. Problems are encoded through their schema.
 */
const answerSerializer: FastifySerializerCompiler<unknown> = (route) =>
  String(route.httpStatus) === '200' ? (data: unknown) => JSON.stringify(data) : serializerCompiler(route as Parameters<typeof serializerCompiler>[0]);

const scoring: FastifyPluginAsyncZod = async (app) => {
  const { item, batch } = scoringSchemas(app.config.limits);

  app.post(
    '/models/:name/score',
    {
      config: { access: 'scorer', scoring: true },
      serializerCompiler: answerSerializer,
      schema: {
        summary: 'Score one feature vector',
        description: 'Answers with class probabilities, the margin and the domain checks, after the request is committed to the audit log.',
        tags: ['scoring'],
        params: modelNameParam,
        body: item,
        response: { 200: jsonResponse('the answer, committed to the audit log', scoreResponseSchema), ...errors },
      },
    },
    async (req, reply) => app.scoring.scoreOne(req.params.name, req.body, context(req, reply)),
  );

  app.post(
    '/models/:name/score-batch',
    {
      config: { access: 'scorer', scoring: true },
      serializerCompiler: answerSerializer,
      schema: {
        summary: 'Score many feature vectors in one call',
        description: `At most limits.batch_items items (default 1,000). One bad item refuses the whole batch, naming its index; nothing of a refused batch is scored or logged.`,
        tags: ['scoring'],
        params: modelNameParam,
        body: batch,
        response: { 200: jsonResponse('one answer per item, in order, all committed to the audit log', scoreBatchResponseSchema), ...errors },
      },
    },
    async (req, reply) => ({ batch_id: req.id, items: await app.scoring.scoreBatch(req.params.name, req.body.items, context(req, reply)) }),
  );
};

export default scoring;
