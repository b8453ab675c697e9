// vitest globalSetup: one throwaway PostgreSQL server for the whole run, shared by the test
// files (each makes databases of its own on it). PLUMBLINE_TEST_PG_URL uses a server already
// running instead. Without server binaries the PostgreSQL suites skip, and this says why, once.
import type { TestProject } from 'vitest/node';
import { type ThrowawayServer, serverBinaries, startThrowawayServer } from './pg-server.js';

declare module 'vitest' {
  export interface ProvidedContext {
    /** The shared server's URL (its maintenance database), or null when there is none. */
    pgUrl: string | null;
    /** Why there is none. */
    pgMissing: string | null;
  }
}

let server: ThrowawayServer | null = null;

export default async function setup(project: TestProject): Promise<() => void> {
  const given = process.env.PLUMBLINE_TEST_PG_URL;
  if (given) {
    project.provide('pgUrl', given);
    project.provide('pgMissing', null);
    return () => undefined;
  }
  const found = serverBinaries();
  if ('missing' in found) {
    process.stdout.write(`PostgreSQL suites skipped: ${found.missing}\n`);
    project.provide('pgUrl', null);
    project.provide('pgMissing', found.missing);
    return () => undefined;
  }
  server = await startThrowawayServer(found.bin);
  project.provide('pgUrl', server.url);
  project.provide('pgMissing', null);
  // Also when the run ends without its teardown (a signal, a closed pipe): no server left behind.
  const remove = (): void => {
    server?.remove();
    server = null;
  };
  process.once('exit', remove);
  return remove;
}
