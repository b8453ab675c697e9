import { defineConfig } from 'vitest/config';

// Two cores on the CI machine: two workers, and generous timeouts for the training tests
// (speed is measured by `npm run bench`, never asserted in a test).
export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    // One throwaway PostgreSQL server for the run, when the machine has the binaries.
    globalSetup: ['test/helpers/postgres-global.ts'],
    pool: 'forks',
    maxWorkers: 2,
    testTimeout: 60_000,
    hookTimeout: 60_000,
  },
});
