import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { renderDocsPage } from '../docs-page.js';

const docs: FastifyPluginAsyncZod = async (app) => {
  app.get('/openapi.json', { config: { access: 'public' }, schema: { hide: true } }, async () => app.swagger());

  let page: string | null = null;
  app.get('/docs', { config: { access: 'public' }, schema: { hide: true } }, async (_req, reply) => {
    page ??= renderDocsPage(app.swagger() as unknown as Parameters<typeof renderDocsPage>[0]);
    return reply.type('text/html; charset=utf-8').send(page);
  });
};

export default docs;
