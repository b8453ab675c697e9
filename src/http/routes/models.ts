import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { type ModelEntry, RegistryError } from '../../bundle/registry.js';
import { ProblemError } from '../../errors.js';
import { decodeDomain } from '../../bundle/domain-codec.js';
import { BUNDLE_FORMAT_V1 } from '../../bundle/schema.js';
import { storedMembers } from '../../bundle/verify.js';
import { requireModel } from '../../scoring/service.js';
import { commonErrors, jsonResponse, modelNameParam, problemResponse } from '../shared-schemas.js';
import { z } from 'zod';

export const featureSchemaOut = z.object({ name: z.string(), unit: z.string(), description: z.string() });

export const modelSummarySchema = z
  .object({
    name: z.string(),
    version: z.string(),
    sha256: z.string(),
    features: z.array(featureSchemaOut),
    classes: z.array(z.string()),
    loaded_at: z.string(),
  })
  .meta({ id: 'ModelSummary' });

export const modelDetailSchema = modelSummarySchema
  .extend({
    format: z.string().describe('plumbline-bundle/2, or plumbline-bundle/1 for a bundle written before ensembles'),
    created_at: z.string(),
    file: z.string().describe('the bundle file it was loaded from'),
    members: z
      .array(z.object({ layers: z.array(z.object({ inputs: z.number(), outputs: z.number(), activation: z.string(), alpha: z.number().optional() })) }))
      .describe('the networks that answer together (the mean of their calibrated probabilities); one for version 1 and imported networks'),
    calibration: z.object({ temperature: z.number(), fit: z.string().optional().describe('fitted, separable (left at 1: the held-out rows gave no minimum), flat or not_fitted') }),
    domain: z.object({
      review_margin: z.number(),
      target_in_domain_rate: z.number().describe('share of held-out in-domain rows the flag was asked to pass'),
      held_out: z
        .object({
          source: z.string(),
          rows: z.number(),
          level: z.number().optional().describe('the level calibrated to: the target, or n / (n + 1) where the rows cannot support it'),
          in_domain_rate: z.number(),
          false_alarm_rate: z.number(),
          false_alarm_ci: z.object({ low: z.number(), high: z.number(), confidence: z.number() }).optional().describe('Clopper-Pearson interval of the false-alarm rate'),
        })
        .describe('the calibration rows and the pass rate measured on them, leave-one-out: the baseline false-alarm rate'),
      detectors: z.array(z.object({ detector: z.string(), threshold: z.number() })).describe('the detectors that vote; a check passes when value <= threshold'),
      left_out: z.array(z.object({ detector: z.string(), reason: z.string() })).describe('detectors asked for that do not vote, and why'),
      evaluation: z.record(z.string(), z.unknown()).describe('pass rates on held-out rows, detection rates and AUROC on generated probes'),
      envelope: z.object({
        tolerance: z.number(),
        features: z.array(z.object({ name: z.string(), unit: z.string(), low: z.number(), high: z.number() })),
      }),
    }),
    training: z.object({
      rows: z.record(z.string(), z.number()),
      seed: z.number(),
      options: z.record(z.string(), z.unknown()),
      members: z.array(z.record(z.string(), z.unknown())).describe('per network trained here: rows, epochs, losses'),
      metrics: z.record(z.string(), z.unknown()),
    }),
  })
  .meta({ id: 'ModelDetail' });

function summary(e: ModelEntry) {
  const b = e.bundle.file;
  return { name: b.name, version: b.version, sha256: b.sha256, features: b.features, classes: b.classes, loaded_at: e.loadedAt.toISOString() };
}

/** The manifest of a loaded bundle: what it takes, what it says and how it was made; no weights. */
function detail(e: ModelEntry) {
  const b = e.bundle.file;
  const env = b.domain.envelope;
  const runtime = decodeDomain(b);
  return {
    ...summary(e),
    format: b.format,
    created_at: b.created_at,
    file: e.path,
    members: storedMembers(b).map((net) => ({ layers: net.layers.map(({ inputs, outputs, activation, alpha }) => ({ inputs, outputs, activation, ...(alpha !== undefined ? { alpha } : {}) })) })),
    calibration: b.calibration,
    domain: {
      review_margin: b.domain.review_margin,
      target_in_domain_rate: b.domain.target_in_domain_rate,
      held_out: b.domain.held_out,
      detectors: runtime.enabled.map((n) => ({ detector: n, threshold: runtime.thresholds[n] })),
      left_out: b.format === BUNDLE_FORMAT_V1 ? [] : b.domain.left_out,
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
      // Version 1 trained one network: shown as the one member it is.
      members:
        b.format === BUNDLE_FORMAT_V1
          ? [{ train_rows: b.training.rows.train, early_stopping_rows: b.training.rows.validation, epochs_run: b.training.epochs_run, best_epoch: b.training.best_epoch, stopped_early: b.training.stopped_early }]
          : b.training.members,
      metrics: b.training.metrics,
    },
  };
}

const models: FastifyPluginAsyncZod = async (app) => {
  app.get(
    '/models',
    { config: { access: 'reader' }, schema: { summary: 'The loaded models', tags: ['models'], response: { 200: jsonResponse('the loaded models', z.object({ items: z.array(modelSummarySchema) })), ...commonErrors } } },
    async () => ({ items: app.registry.list().map(summary) }),
  );

  app.get(
    '/models/:name',
    {
      config: { access: 'reader' },
      schema: {
        summary: "One model's manifest: features, classes, domain settings and training metrics (no weights)",
        tags: ['models'],
        params: modelNameParam,
        response: { 200: jsonResponse('the manifest', modelDetailSchema), 404: problemResponse('no model of that name is loaded'), ...commonErrors },
      },
    },
    async (req) => detail(requireModel(app.registry, req.params.name)),
  );

  app.post(
    '/models/reload',
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
        const entries = await app.registry.reload();
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
