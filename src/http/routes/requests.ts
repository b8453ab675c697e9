import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { type FieldError, ProblemError } from '../../errors.js';
import type { RequestFilter } from '../../store/request-query.js';
import { withCursor } from '../cursor-param.js';
import { queryWindow } from '../query-window.js';
import { z } from 'zod';
import { requestPageSchema } from '../../contracts/logged-request.js';
import { commonErrors, isoTime, jsonResponse, problemResponse } from '../shared-schemas.js';

export const requestsQuerySchema = z.strictObject({
  // No bundle has a longer model name (64) or class name (64): a longer one is a mistake.
  model: z.string().max(64, 'a model name has at most 64 characters').optional(),
  from: isoTime.optional().describe('inclusive'),
  to: isoTime.optional().describe('exclusive'),
  in_domain: z.enum(['true', 'false']).optional(),
  label: z.string().max(64, 'a class name has at most 64 characters').optional().describe('predicted class'),
  tag: z.union([z.string(), z.array(z.string())]).optional().describe('key:value; repeat to require several'),
  limit: z.coerce.number().int().min(1).max(1000).default(100),
  cursor: z.string().optional().describe('next_cursor of the previous page'),
});

const requests: FastifyPluginAsyncZod = async (app) => {
  app.get(
    '/requests',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'The audit log, newest first',
        description: 'Every scored vector with its inputs, answer and model version. Filters combine with AND; page with `cursor`.',
        tags: ['audit'],
        querystring: requestsQuerySchema,
        response: { 200: jsonResponse('a page of the audit log', requestPageSchema), 400: problemResponse('a filter or the cursor is not valid'), ...commonErrors },
      },
    },
    async (req) => {
      const q = req.query;
      const errors: FieldError[] = [];
      const tags: Array<[string, string]> = [];
      for (const t of q.tag === undefined ? [] : Array.isArray(q.tag) ? q.tag : [q.tag]) {
        const at = t.indexOf(':');
        if (at <= 0) errors.push({ parameter: 'tag', detail: `${JSON.stringify(t)} is not key:value` });
        else tags.push([t.slice(0, at), t.slice(at + 1)]);
      }
      const { from, to, errors: windowErrors } = queryWindow(q);
      errors.push(...windowErrors);
      if (errors.length > 0) throw new ProblemError('invalid-request', 'the query string has problems', errors);
      const filter: RequestFilter = {
        ...(q.model !== undefined ? { model: q.model } : {}),
        ...(from !== undefined ? { from } : {}),
        ...(to !== undefined ? { to } : {}),
        ...(q.in_domain !== undefined ? { inDomain: q.in_domain === 'true' } : {}),
        ...(q.label !== undefined ? { label: q.label } : {}),
        ...(tags.length > 0 ? { tags } : {}),
      };
      const page = await withCursor(() => app.store.queryRequests(filter, q.limit, q.cursor));
      const outcomes = await app.store.outcomes.current(page.items.map((i) => i.request_id));
      return {
        items: page.items.map((i) => {
          const o = outcomes.get(i.request_id);
          return { ...i, outcome: o ? { label: o.label, observed_at: o.observed_at === null ? null : new Date(o.observed_at).toISOString() } : null };
        }),
        next_cursor: page.next_cursor,
      };
    },
  );
};

export default requests;
