import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { type ModelEntry, RegistryError } from '../../bundle/registry.js';
import { ProblemError } from '../../errors.js';
import { OPTIONAL_DETECTORS } from '../../bundle/domain-fit.js';
import { requireModel } from '../../scoring/service.js';
import { commonErrors, jsonResponse, modelDetailSchema, modelNameParam, modelSummarySchema, problemResponse } from '../schemas.js';
import { z } from 'zod';

function summary(e: ModelEntry) {
  const b = e.bundle.file;
  return { name: b.name, version: b.version, sha256: b.sha256, features: b.features, classes: b.classes, loaded_at: e.loadedAt.toISOString() };
}

/** The manifest of a loaded bundle: what it takes, what it says and how it was made; no weights. */
function detail(e: ModelEntry) {
  const b = e.bundle.file;
  const env = b.domain.envelope;
  return {
    ...summary(e),
    created_at: b.created_at,
    file: e.path,
    network: { layers: b.network.layers.map(({ inputs, outputs, activation, alpha }) => ({ inputs, outputs, activation, ...(alpha !== undefined ? { alpha } : {}) })) },
    calibration: b.calibration,
    domain: {
      review_margin: b.domain.review_margin,
      target_in_domain_rate: b.domain.target_in_domain_rate,
      held_out: b.domain.held_out,
      detectors: [
        { detector: 'envelope', threshold: 0 },
        ...OPTIONAL_DETECTORS.flatMap((n) => {
          const d = b.domain[n];
          return d ? [{ detector: n, threshold: d.threshold }] : [];
        }),
      ],
      evaluation: b.domain.evaluation,
      envelope: {
        tolerance: env.tolerance,
        features: b.features.map((f, j) => ({ name: f.name, unit: f.unit, low: env.low[j] as number, high: env.high[j] as number })),
      },
    },
    training: {
      rows: b.training.rows,
      seed: b.training.seed,
      options: b.training.options,
      epochs_run: b.training.epochs_run,
      best_epoch: b.training.best_epoch,
      metrics: b.training.metrics,
    },
  };
}

const models: FastifyPluginAsyncZod = async (app) => {
  app.get(
    '/v1/models',
    { config: { access: 'reader' }, schema: { summary: 'The loaded models', tags: ['models'], response: { 200: jsonResponse('the loaded models', z.object({ items: z.array(modelSummarySchema) })), ...commonErrors } } },
    async () => ({ items: app.services.registry.list().map(summary) }),
  );

  app.get(
    '/v1/models/:name',
    {
      config: { access: 'reader' },
      schema: {
        summary: "One model's manifest: features, classes, domain settings and training metrics (no weights)",
        tags: ['models'],
        params: modelNameParam,
        response: { 200: jsonResponse('the manifest', modelDetailSchema), 404: problemResponse('no model of that name is loaded'), ...commonErrors },
      },
    },
    async (req) => detail(requireModel(app.services.registry, req.params.name)),
  );

  app.post(
    '/v1/models/reload',
    {
      config: { access: 'admin' },
      schema: {
        summary: 'Load the models directory again (as SIGHUP does) and serve what it holds',
        description: 'Every bundle is verified before any is swapped in; when one fails, nothing changes and the answer names the files.',
        tags: ['models'],
        response: { 200: jsonResponse('the models now served', z.object({ items: z.array(modelSummarySchema) })), 422: problemResponse('a bundle in the directory cannot be served; nothing changed'), ...commonErrors },
      },
    },
    async (req) => {
      try {
        const entries = await app.services.registry.reload();
        req.log.info({ models: entries.map((e) => `${e.name}@${e.bundle.file.version}`), by: req.apiKey?.label ?? null }, 'models reloaded');
        return { items: entries.map(summary) };
      } catch (err) {
        if (err instanceof RegistryError) throw new ProblemError('reload-refused', `${err.problems.join('; ')}`);
        throw err;
      }
    },
  );
};

export default models;
