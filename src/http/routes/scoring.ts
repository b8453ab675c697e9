import { type FastifyPluginAsyncZod, serializerCompiler } from 'fastify-type-provider-zod';
import type { FastifySerializerCompiler } from 'fastify/types/schema.js';
import type { CallContext } from '../../scoring/service.js';
import type { FastifyReply, FastifyRequest } from 'fastify';
import { commonErrors, jsonResponse, modelNameParam, problemResponse, scoreBatchResponseSchema, scoreResponseSchema, scoringSchemas } from '../schemas.js';

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
