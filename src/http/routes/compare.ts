import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import { BundleError, type LoadedBundle, parseBundle } from '../../bundle/verify.js';
import { compareReportSchema } from '../../contracts/compare-report.js';
import { ProblemError } from '../../errors.js';
import { IncompatibleBundleError, compareCandidate } from '../../reports/compare.js';
import { commonErrors, isoTime, jsonResponse, modelNameParam, problemResponse } from '../shared-schemas.js';

const DAY = 86_400_000;
/** As for drift reports: a window spans at most 366 days. */
const MAX_WINDOW_MS = 366 * DAY;

export const compareQuerySchema = z.strictObject({
  from: isoTime.optional().describe('answers received at or after (default: 30 days before `to`)'),
  to: isoTime.optional().describe('answers received before (default: now)'),
});

const compare: FastifyPluginAsyncZod = async (app) => {
  app.post(
    '/models/:name/compare',
    {
      config: { access: 'admin' },
      // A bundle is larger than a scoring body: the bound is the one bundle files have.
      bodyLimit: app.config.limits.bundle_bytes,
      schema: {
        summary: 'Rescore the logged vectors of a model with a candidate bundle, and compare the two',
        description:
          'The body is a bundle file (plumbline-bundle/1 or /2, as `plumbline train` writes it). It rescores, offline and without logging, the answers of the model received in [from, to): agreement with the logged labels, the label table, each in-domain share, and on the answers with an outcome both accuracies with McNemar\'s exact test. Computed on the request; the answer comes when every row is rescored.',
        tags: ['outcomes'],
        params: modelNameParam,
        querystring: compareQuerySchema,
        body: z.record(z.string(), z.unknown()).describe('the candidate bundle file'),
        response: {
          200: jsonResponse('the comparison', compareReportSchema),
          400: problemResponse('the window is not valid'),
          404: problemResponse('the audit log holds no bundle of that model'),
          413: problemResponse('the bundle is larger than limits.bundle_bytes'),
          422: problemResponse('the body is not a bundle plumbline can load, or it takes other features'),
          ...commonErrors,
        },
      },
    },
    async (req) => {
      const to = req.query.to !== undefined ? Date.parse(req.query.to) : Date.now();
      const from = req.query.from !== undefined ? Date.parse(req.query.from) : to - 30 * DAY;
      if (!(from < to)) throw new ProblemError('invalid-request', 'the window is empty', [{ parameter: req.query.to !== undefined ? 'to' : 'from', detail: 'must be later than from' }]);
      if (to - from > MAX_WINDOW_MS) throw new ProblemError('invalid-request', 'the window is too long', [{ parameter: 'from', detail: 'the window may span at most 366 days' }]);
      const name = req.params.name;
      if (!(await app.store.outcomes.latestModel(name))) throw new ProblemError('unlogged-model', `the audit log holds no bundle for a model named ${JSON.stringify(name)}`);
      let candidate: LoadedBundle;
      try {
        candidate = parseBundle(JSON.stringify(req.body), 'the body');
      } catch (err) {
        if (err instanceof BundleError) throw new ProblemError('invalid-bundle', err.message);
        throw err;
      }
      try {
        return await compareCandidate(app.store.outcomes, name, candidate, { from, to });
      } catch (err) {
        if (err instanceof IncompatibleBundleError) throw new ProblemError('incompatible-bundle', err.message);
        throw err;
      }
    },
  );
};

export default compare;
