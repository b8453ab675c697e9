import swagger from '@fastify/swagger';
import Fastify, { type FastifyInstance, type FastifyServerOptions, LogController } from 'fastify';
import { type ZodTypeProvider, jsonSchemaTransform, jsonSchemaTransformObject, serializerCompiler } from 'fastify-type-provider-zod';
import { ProblemError } from '../errors.js';
import { uuidv7 } from '../ids.js';
import { parseJsonBody } from './json-body.js';
import { lazyRequestLogger } from './request-logger.js';
import { VERSION } from '../version.js';
import auth from './plugins/auth.js';
import guards from './plugins/guards.js';
import { registerRuntime } from './plugins/runtime.js';
import type { Runtime } from '../runtime.js';
import problems, { clientErrorHandler, sendProblem, toProblem } from './problems.js';
import { zodValidatorCompiler } from './validation.js';
import apiDescription from './routes/api-description.js';
import health from './routes/health.js';
import models from './routes/models.js';
import alerts from './routes/alerts.js';
import metrics from './routes/metrics.js';
import reports from './routes/reports.js';
import explanations from './routes/explanations.js';
import requests from './routes/requests.js';
import outcomes from './routes/outcomes.js';
import outcomesReport from './routes/outcomes-report.js';
import compare from './routes/compare.js';
import scoring from './routes/scoring.js';

export interface AppOptions {
  /** pino options or instance; false for none (tests). */
  logger?: FastifyServerOptions['logger'] | FastifyServerOptions['loggerInstance'];
  /** Version shown in the OpenAPI document; the package's by default. */
  version?: string;
  /** Serve HTTPS with this PEM certificate chain and key. */
  https?: { cert: Buffer; key: Buffer };
}

const PATH_MODEL = /^\/v1\/models\/([^/?]+)/;
/** Levels at which the one line per answer is written (its fields are not even built otherwise). */
const LOGS_INFO = new Set(['trace', 'debug', 'info']);

type OpenApiLike = ReturnType<typeof jsonSchemaTransformObject> & { components?: { schemas?: Record<string, unknown> } };

/**
 * Drops component schemas nothing refers to: zod's registry emits an input and an output copy of
 * every named schema, and responses only use the output one.
 */
function pruneUnusedSchemas(doc: OpenApiLike): OpenApiLike {
  const schemas = { ...(doc.components?.schemas ?? {}) };
  for (let changed = true; changed; ) {
    changed = false;
    for (const name of Object.keys(schemas)) {
      const { [name]: _, ...others } = schemas;
      const text = JSON.stringify({ ...doc, components: { ...doc.components, schemas: others } });
      if (!text.includes(`"#/components/schemas/${name}"`)) {
        delete schemas[name];
        changed = true;
      }
    }
  }
  return { ...doc, components: { ...doc.components, schemas } } as OpenApiLike;
}

/**
 * Builds the HTTP app over a runtime the caller opened (CONVENTIONS 1 and 2): ecosystem plugins,
 * then infrastructure (one plugin per part of the runtime, problems), then hooks, then one plugin
 * per resource, the versioned ones under /v1. Closing the app closes the runtime's parts.
 */
export async function buildApp(runtime: Runtime, options: AppOptions = {}): Promise<FastifyInstance> {
  const logger = options.logger ?? false;
  const isInstance = typeof logger === 'object' && logger !== null && 'child' in logger;
  const app = Fastify({
    ...(options.https ? { https: options.https } : {}),
    ...(isInstance ? { loggerInstance: logger as FastifyServerOptions['loggerInstance'] } : { logger: logger as FastifyServerOptions['logger'] }),
    bodyLimit: runtime.config.limits.body_bytes,
    genReqId: () => uuidv7(),
    requestIdHeader: false,
    // One line per request from the onResponse hook below, not fastify's two.
    logController: new LogController({ disableRequestLogging: true, requestIdLogLabel: 'req_id' }),
    // Each request's logger is made when it first writes a line (request-logger.ts).
    ...(logger ? { childLoggerFactory: lazyRequestLogger } : {}),
    requestTimeout: 30_000,
    // Model names are at most 64 characters; a longer parameter is a 404 from our handler.
    routerOptions: { maxParamLength: 256 },
    // A URL the router cannot decode, or a path segment beyond maxParamLength: problem+json too.
    frameworkErrors: (err, _req, reply) => void sendProblem(reply, toProblem(err, runtime.config.limits.body_bytes)),
    clientErrorHandler,
    // Requests that reach a closing server on an open connection are still answered, with
    // Connection: close (below); the audit log closes only after the last of them.
    return503OnClosing: false,
  }).withTypeProvider<ZodTypeProvider>();
  app.setValidatorCompiler(zodValidatorCompiler);
  // Answers are encoded through their response schemas; the scoring routes set their own.
  app.setSerializerCompiler(serializerCompiler);
  // JSON only: fastify would otherwise hand a text/plain body to the schema as a string. Our own
  // JSON parser keeps the reason a body does not parse, which fastify's drops.
  app.removeContentTypeParser(['text/plain', 'application/json']);
  // As bytes: a string would already have U+FFFD in place of invalid UTF-8 (json-body.ts).
  app.addContentTypeParser('application/json', { parseAs: 'buffer' }, parseJsonBody);

  await app.register(swagger, {
    openapi: {
      openapi: '3.1.0',
      info: {
        title: 'plumbline',
        version: options.version ?? VERSION,
        description:
          'Scores feature vectors with loaded classifier bundles, says whether each vector lies inside the training domain, and keeps an audit log of every answer. Errors are RFC 9457 problem+json.',
      },
      components: {
        securitySchemes: {
          apiKey: {
            type: 'http',
            scheme: 'bearer',
            description: 'An API key made with `plumbline keys create`. Needed by every route but the public ones once one key exists in the database.',
          },
        },
      },
      tags: [
        { name: 'scoring', description: 'class probabilities, margin and domain checks' },
        { name: 'models', description: 'the loaded bundles' },
        { name: 'audit', description: 'the audit log' },
        { name: 'drift', description: 'drift reports against the training distribution' },
        { name: 'alerts', description: 'alerts raised by the rules of the configuration' },
        { name: 'health', description: 'liveness and readiness' },
      ],
    },
    transform: jsonSchemaTransform,
    transformObject: (doc) => pruneUnusedSchemas(jsonSchemaTransformObject(doc) as OpenApiLike),
  });

  await registerRuntime(app, runtime);
  await app.register(problems, {
    bodyLimit: runtime.config.limits.body_bytes,
    onRejected: ({ code, status, request }) => {
      const path = request.url.split('?')[0] ?? '';
      const length = Number(request.headers['content-length']);
      const model = PATH_MODEL.exec(path)?.[1]?.slice(0, 64) ?? null;
      // Only loaded models become label values: garbage paths must not grow the series.
      runtime.metrics.rejected.inc({ model: model === null ? '' : runtime.registry.get(model) ? model : 'unknown', problem: code });
      runtime.store.log.appendRejected({
        requestId: request.id,
        receivedAt: Date.now(),
        method: request.method,
        route: path.slice(0, 512),
        modelName: model,
        status,
        problemType: code,
        bodyBytes: Number.isFinite(length) ? length : null,
      });
    },
  });

  // Node would answer a missing Host with a bare 400; the guards plugin answers it as problem+json.
  (app.server as { requireHostHeader?: boolean }).requireHostHeader = false;
  await app.register(auth, { mode: runtime.config.auth, keys: runtime.store.keys });
  // While shutting down, every answer asks the client to close its connection, so that keep-alive
  // sockets neither hold the process open nor carry further requests (the listener is closed).
  let closing = false;
  app.addHook('preClose', async () => {
    closing = true;
  });
  await app.register(guards, { requestsPerMinute: runtime.config.limits.requests_per_minute, eventLoopDelayMs: runtime.config.limits.event_loop_delay_ms, closing: () => closing });

  // One line per answer at info level: method, route and outcome only, feature values are never
  // logged. No hook at all when the service logs above info (its level is set once, at start).
  if (LOGS_INFO.has(app.log.level)) {
    app.addHook('onResponse', (request, reply, done) => {
      request.log.info({ method: request.method, route: request.routeOptions.url ?? null, status: reply.statusCode, ms: Number(reply.elapsedTime.toFixed(3)) }, 'answered');
      done();
    });
  }

  await app.register(health);
  await app.register(metrics);
  await app.register(apiDescription);
  await app.register(
    async (v1) => {
      await v1.register(models);
      await v1.register(scoring);
      await v1.register(requests);
      await v1.register(outcomes);
      await v1.register(outcomesReport);
      await v1.register(compare);
      await v1.register(explanations);
      await v1.register(reports);
      await v1.register(alerts);
    },
    { prefix: '/v1' },
  );
  return app;
}
