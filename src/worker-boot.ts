import { Worker, type WorkerOptions } from 'node:worker_threads';

/**
 * Starts a worker on a module of this project: `name` is the module's file name without its
 * extension, next to `from` (the caller's import.meta.url). Built, the module is plain JavaScript.
 * Run from the TypeScript sources (tests, tsx), the worker first registers tsx's loader, since
 * workers on Node 20 do not take --import from execArgv.
 */
export function startModuleWorker(from: string, name: string, options: WorkerOptions): Worker {
  if (!from.endsWith('.ts')) return new Worker(new URL(`./${name}.js`, from), options);
  const target = new URL(`./${name}.ts`, from).href;
  const boot = `import('tsx/esm/api').then((m) => { m.register(); return import(${JSON.stringify(target)}); });`;
  return new Worker(boot, { ...options, eval: true });
}
