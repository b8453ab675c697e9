import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';

const metrics: FastifyPluginAsyncZod = async (app) => {
  if (!app.config.metrics.enabled) return;
  app.get(
    '/metrics',
    {
      config: { access: app.config.metrics.public ? 'public' : 'reader' },
      schema: {
        summary: 'Metrics in the Prometheus text exposition format (docs/metrics.md lists them)',
        tags: ['health'],
        response: { 200: { description: 'the metrics', content: { 'text/plain': { schema: z.string() } } } },
      },
    },
    async (_req, reply) => {
      const { registry } = app.metrics;
      return reply.type(registry.contentType).send(await registry.metrics());
    },
  );
};

export default metrics;
