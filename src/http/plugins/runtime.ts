import type { FastifyInstance } from 'fastify';
import fp from 'fastify-plugin';
import type { Config } from '../../config/config.js';
import type { Runtime, Services } from '../../runtime.js';

declare module 'fastify' {
  interface FastifyInstance {
    config: Config;
    store: Services['store'];
    registry: Services['registry'];
    metrics: Services['metrics'];
    scoring: Services['scoring'];
    explanations: Services['explanations'];
    reports: Services['reports'];
    alerting: Services['alerting'];
  }
}

/**
 * One fastify plugin per part of the runtime (store, registry, metrics, scoring, explanations,
 * reports, alerting, jobs), each named, declaring the parts it needs, decorating the app with its part
 * and closing it in an onClose hook. Fastify runs onClose hooks in the reverse order of
 * registration, after the server has stopped taking requests and the in-flight ones have
 * finished: the jobs stop first and the store closes last.
 */
export async function registerRuntime(app: FastifyInstance, runtime: Runtime): Promise<void> {
  app.decorate('config', runtime.config);
  for (const part of runtime.components) {
    await app.register(
      fp(
        async (instance: FastifyInstance) => {
          if (part.value !== null) instance.decorate(part.name, part.value);
          instance.addHook('onClose', part.close);
        },
        { name: part.name, dependencies: [...part.dependsOn], fastify: '5.x' },
      ),
    );
  }
}
