import { execFileSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
/** Where `npm run build` puts the compiled service (tsconfig.build.json). */
export const DIST = fileURLToPath(new URL('../../dist/', import.meta.url));

let built = false;

/**
 * Compiles the service as `npm start` does (tsc -p tsconfig.build.json, into dist/), once per
 * process, so that the HTTP benchmarks time the JavaScript that is served rather than the
 * TypeScript loader's output (tsx keeps function names by wrapping every closure it creates).
 */
export function buildService(): string {
  if (!built) {
    execFileSync(process.execPath, [fileURLToPath(new URL('../../node_modules/typescript/bin/tsc', import.meta.url)), '-p', 'tsconfig.build.json'], { cwd: ROOT, stdio: 'inherit' });
    built = true;
  }
  return DIST;
}

/** The compiled module at `path` under dist/ (built by buildService in the parent process). */
export function distModule(path: string): string {
  const file = `${DIST}${path}`;
  if (!existsSync(file)) throw new Error(`${file} is missing: the benchmark builds it (bench/lib/build.ts); run npm run build to start this script by hand`);
  return file;
}
