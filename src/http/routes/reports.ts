import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import { cursorCodec } from '../../cursor.js';
import { withCursor } from '../cursor-param.js';
import { queryWindow } from '../query-window.js';
import { ProblemError } from '../../errors.js';
import type { DriftReport } from '../../contracts/drift-report.js';
import { renderReportHtml } from '../../reports/html.js';
import { ReportError } from '../../reports/service.js';
import { driftReportSchema } from '../../contracts/drift-report.js';
import { modelRefSchema } from '../../contracts/model-ref.js';
import { commonErrors, isoTime, jsonResponse, problemResponse } from '../shared-schemas.js';

export const reportSummarySchema = z.object({
  id: z.string(),
  model: modelRefSchema,
  window: z.object({ from: z.string(), to: z.string() }),
  created_at: z.string(),
  trigger: z.enum(['nightly', 'request', 'cli', 'demo']),
  verdict: z.string(),
  counts: z.object({ scored: z.number(), rejected: z.number(), out_of_domain: z.number(), other_versions: z.number() }),
});

export const reportListQuerySchema = z.strictObject({
  model: z.string().optional(),
  from: isoTime.optional().describe('windows starting at or after'),
  to: isoTime.optional().describe('windows starting before'),
  limit: z.coerce.number().int().min(1).max(500).default(50),
  cursor: z.string().optional(),
});

export const reportRequestSchema = z.strictObject({
  model: z.string().min(1),
  from: isoTime.describe('inclusive'),
  to: isoTime.describe('exclusive'),
});

export const reportIdParam = z.object({ id: z.string().min(1) });

/** A POSTed window may span at most this long; the nightly job covers longer histories day by day. */
const MAX_WINDOW_MS = 366 * 24 * 3_600_000;

// Opaque page cursor: "d1." + the last seq seen, base64url (as for the audit log).
const codec = cursorCodec('d1');

const reports: FastifyPluginAsyncZod = async (app) => {
  const { store } = app;
  const load = async (id: string): Promise<DriftReport> => {
    const stored = await store.drift.getReport(id);
    if (!stored) throw new ProblemError('unknown-report', `no drift report has the id ${JSON.stringify(id)}`);
    return JSON.parse(stored.report) as DriftReport;
  };

  app.get(
    '/drift-reports',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'Stored drift reports, newest first',
        tags: ['drift'],
        querystring: reportListQuerySchema,
        response: { 200: jsonResponse('a page of report summaries', z.object({ items: z.array(reportSummarySchema), next_cursor: z.string().nullable() })), 400: problemResponse('a filter or the cursor is not valid'), ...commonErrors },
      },
    },
    async (req) => {
      const q = req.query;
      const { errors, ...window } = queryWindow(q);
      if (errors.length > 0) throw new ProblemError('invalid-request', 'the window is empty', errors);
      const rows = await store.drift.listReports(
        { ...(q.model !== undefined ? { model: q.model } : {}), ...window },
        q.limit + 1,
        q.cursor !== undefined ? withCursor(() => codec.decode(q.cursor as string)) : undefined,
      );
      const page = rows.slice(0, q.limit);
      return {
        items: page.map((r) => {
          const report = JSON.parse(r.report) as DriftReport;
          return { id: r.id, model: report.model, window: report.window, created_at: report.created_at, trigger: r.trigger as 'nightly', verdict: report.verdict, counts: report.counts };
        }),
        next_cursor: rows.length > q.limit ? codec.encode((page[page.length - 1] as { seq: number }).seq) : null,
      };
    },
  );

  app.get(
    '/drift-reports/:id',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'One drift report',
        tags: ['drift'],
        params: reportIdParam,
        response: { 200: jsonResponse('the report', driftReportSchema), 404: problemResponse('no report has that id'), ...commonErrors },
      },
    },
    async (req) => load(req.params.id),
  );

  app.get(
    '/drift-reports/:id.html',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'One drift report as a self-contained HTML page (charts in inline SVG, nothing fetched)',
        tags: ['drift'],
        params: reportIdParam,
        response: { 200: { description: 'the page', content: { 'text/html': { schema: z.string() } } }, 404: problemResponse('no report has that id'), ...commonErrors },
      },
    },
    async (req, reply) => reply.type('text/html; charset=utf-8').send(renderReportHtml(await load(req.params.id))),
  );

  app.post(
    '/drift-reports',
    {
      config: { access: 'admin' },
      schema: {
        summary: 'Run a drift report now for a model and a window',
        description: 'Built on a worker thread over the audit log, stored, and returned. The model is compared with the training reference of the bundle the log holds for it (the one loaded last).',
        tags: ['drift'],
        body: reportRequestSchema,
        response: { 201: jsonResponse('the report, stored', driftReportSchema), 400: problemResponse('the window is not valid'), 404: problemResponse('the audit log holds no bundle of that model'), ...commonErrors },
      },
    },
    async (req, reply) => {
      const from = Date.parse(req.body.from);
      const to = Date.parse(req.body.to);
      if (!(from < to)) throw new ProblemError('invalid-request', 'the window is empty', [{ pointer: '#/to', detail: 'must be later than from' }]);
      if (to - from > MAX_WINDOW_MS) throw new ProblemError('invalid-request', 'the window is too long', [{ pointer: '#/to', detail: 'the window may span at most 366 days' }]);
      try {
        const report = await app.reports.run(req.body.model, { from, to }, 'request');
        return reply.code(201).send(report);
      } catch (err) {
        if (err instanceof ReportError && err.reason === 'unknown-model') throw new ProblemError('unlogged-model', err.message, [{ pointer: '#/model', detail: 'no bundle of this name was ever loaded by a service writing to this audit log' }]);
        throw err;
      }
    },
  );
};

export default reports;
