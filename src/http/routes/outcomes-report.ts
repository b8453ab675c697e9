import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import { outcomesReportSchema } from '../../contracts/outcomes-report.js';
import type { OutcomesReport } from '../../contracts/outcomes-report.js';
import { ProblemError } from '../../errors.js';
import { renderOutcomesHtml } from '../../reports/outcomes-html.js';
import { outcomesReportFor } from '../../reports/outcomes-report.js';
import { commonErrors, isoTime, jsonResponse, modelNameParam, problemResponse } from '../shared-schemas.js';

const DAY = 86_400_000;
/** As for drift reports: a window spans at most 366 days. */
const MAX_WINDOW_MS = 366 * DAY;

export const outcomesReportQuerySchema = z.strictObject({
  from: isoTime.optional().describe('answers received at or after (default: 24 hours before `to`)'),
  to: isoTime.optional().describe('answers received before (default: now)'),
  format: z.enum(['json', 'html']).default('json').describe('html: the report as a self-contained page'),
});

const outcomesReport: FastifyPluginAsyncZod = async (app) => {
  const build = async (name: string, q: { from?: string | undefined; to?: string | undefined }): Promise<OutcomesReport> => {
    const to = q.to !== undefined ? Date.parse(q.to) : Date.now();
    const from = q.from !== undefined ? Date.parse(q.from) : to - DAY;
    if (!(from < to)) throw new ProblemError('invalid-request', 'the window is empty', [{ parameter: q.to !== undefined ? 'to' : 'from', detail: 'must be later than from' }]);
    if (to - from > MAX_WINDOW_MS) throw new ProblemError('invalid-request', 'the window is too long', [{ parameter: 'from', detail: 'the window may span at most 366 days' }]);
    const report = await outcomesReportFor(app.store.outcomes, name, { from, to });
    if (!report) throw new ProblemError('unlogged-model', `the audit log holds no bundle for a model named ${JSON.stringify(name)}`);
    return report;
  };
  const errors = { 400: problemResponse('the window is not valid'), 404: problemResponse('the audit log holds no bundle of that model'), ...commonErrors };

  app.get(
    '/models/:name/outcomes-report',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'How right the model was, over a window, once outcomes are known',
        description:
          'Over the answers of the bundle of this model loaded last, received in [from, to), and the outcomes recorded for them: accuracy with its Wilson interval, per-class precision/recall/F1, the confusion matrix, log-loss, Brier score, reliability and ECE, accuracy in and out of domain (Fisher exact), by margin band and by review flag, and findings. `format=html` (or the `.html` route) returns the page.',
        tags: ['outcomes'],
        params: modelNameParam,
        querystring: outcomesReportQuerySchema,
        response: { 200: { description: 'the report', content: { 'application/json': { schema: outcomesReportSchema }, 'text/html': { schema: z.string() } } }, ...errors },
      },
    },
    async (req, reply) => {
      const report = await build(req.params.name, req.query);
      if (req.query.format === 'html') return reply.type('text/html; charset=utf-8').serializer((s: unknown) => s as string).send(renderOutcomesHtml(report));
      return report;
    },
  );

  app.get(
    '/models/:name/outcomes-report.html',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'The outcomes report as a self-contained HTML page (charts in inline SVG, nothing fetched)',
        tags: ['outcomes'],
        params: modelNameParam,
        querystring: outcomesReportQuerySchema.omit({ format: true }),
        response: { 200: { description: 'the page', content: { 'text/html': { schema: z.string() } } }, ...errors },
      },
    },
    async (req, reply) => reply.type('text/html; charset=utf-8').send(renderOutcomesHtml(await build(req.params.name, req.query))),
  );
};

export default outcomesReport;
