import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import { formatDuration } from '../../config/durations.js';
import { cursorCodec } from '../../cursor.js';
import { withCursor } from '../cursor-param.js';
import { queryWindow } from '../query-window.js';
import { ProblemError } from '../../errors.js';
import { commonErrors, jsonResponse, problemResponse } from '../shared-schemas.js';

const isoTime = z.iso.datetime({ offset: true });

const alertSchema = z
  .object({
    id: z.string(),
    state: z.enum(['raised', 'cleared']),
    rule: z.string(),
    model: z.string(),
    signal: z.string(),
    direction: z.enum(['above', 'below']),
    threshold: z.number(),
    window: z.string().describe('the rule window, e.g. 15m'),
    raised_value: z.number(),
    raised_at: z.string(),
    cleared_value: z.number().nullable(),
    cleared_at: z.string().nullable(),
  })
  .meta({ id: 'Alert' });

const codec = cursorCodec('a1');

const alerts: FastifyPluginAsyncZod = async (app) => {
  app.get(
    '/alerts',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'Alerts raised and cleared by the rules, newest first',
        tags: ['alerts'],
        querystring: z.strictObject({
          state: z.enum(['raised', 'cleared']).optional().describe('raised: not cleared yet'),
          model: z.string().optional(),
          from: isoTime.optional().describe('raised at or after'),
          to: isoTime.optional().describe('raised before'),
          limit: z.coerce.number().int().min(1).max(500).default(100),
          cursor: z.string().optional(),
        }),
        response: { 200: jsonResponse('a page of alerts', z.object({ items: z.array(alertSchema), next_cursor: z.string().nullable() })), 400: problemResponse('a filter or the cursor is not valid'), ...commonErrors },
      },
    },
    async (req) => {
      const q = req.query;
      const { errors, ...window } = queryWindow(q);
      if (errors.length > 0) throw new ProblemError('invalid-request', 'the window is empty', errors);
      const rows = await app.store.alerts.listAlerts(
        {
          ...(q.state ? { state: q.state } : {}),
          ...(q.model !== undefined ? { model: q.model } : {}),
          ...window,
        },
        q.limit + 1,
        q.cursor !== undefined ? withCursor(() => codec.decode(q.cursor as string)) : undefined,
      );
      const page = rows.slice(0, q.limit);
      return {
        items: page.map((a) => ({
          id: a.id,
          state: a.cleared_at === null ? ('raised' as const) : ('cleared' as const),
          rule: a.rule,
          model: a.model_name,
          signal: a.signal,
          direction: a.direction,
          threshold: a.threshold,
          window: formatDuration(a.window_ms),
          raised_value: a.raised_value,
          raised_at: new Date(a.raised_at).toISOString(),
          cleared_value: a.cleared_value,
          cleared_at: a.cleared_at === null ? null : new Date(a.cleared_at).toISOString(),
        })),
        next_cursor: rows.length > q.limit ? codec.encode((page[page.length - 1] as { seq: number }).seq) : null,
      };
    },
  );
};

export default alerts;
