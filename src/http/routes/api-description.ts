import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { renderApiPage } from '../api-page.js';

const apiDescription: FastifyPluginAsyncZod = async (app) => {
  app.get('/openapi.json', { config: { access: 'public' }, schema: { hide: true } }, async () => app.swagger());

  let page: string | null = null;
  app.get('/api.html', { config: { access: 'public' }, schema: { hide: true } }, async (_req, reply) => {
    page ??= renderApiPage(app.swagger() as unknown as Parameters<typeof renderApiPage>[0]);
    return reply.type('text/html; charset=utf-8').send(page);
  });
};

export default apiDescription;
