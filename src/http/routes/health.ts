import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import { jsonResponse } from '../shared-schemas.js';

export const healthSchema = z.object({ status: z.literal('ok') });
export const readySchema = z.object({
  status: z.enum(['ready', 'not ready']),
  models: z.number().int(),
  database: z.enum(['writable', 'not writable']),
  reason: z.string().optional().describe("why the audit log cannot be written, when it cannot: the last commit's or test write's error"),
});

const health: FastifyPluginAsyncZod = async (app) => {
  app.get('/healthz', { config: { access: 'public' }, schema: { summary: 'Liveness: the process answers', tags: ['health'], response: { 200: jsonResponse('the process is up', healthSchema) } } }, async () => ({
    status: 'ok' as const,
  }));

  app.get(
    '/readyz',
    {
      config: { access: 'public' },
      schema: {
        summary: 'Readiness: at least one model is loaded and the audit log can be written',
        description:
          'Writable means the last commits of the audit log succeeded; after a failed commit, or a quiet spell of 5 s, a test write (at most one a second) decides. A node whose disk is full or whose database files cannot be written answers 503 until a write succeeds again.',
        tags: ['health'],
        response: { 200: jsonResponse('ready to score', readySchema), 503: jsonResponse('not ready: no model loaded, or the database cannot be written', readySchema) },
      },
    },
    async (_req, reply) => {
      const models = app.registry.list().length;
      const { writable, reason } = await app.store.writeState();
      const ready = models > 0 && writable;
      return reply.code(ready ? 200 : 503).send({ status: ready ? 'ready' : 'not ready', models, database: writable ? 'writable' : 'not writable', ...(reason !== null ? { reason } : {}) });
    },
  );
};

export default health;
