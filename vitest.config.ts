import { defineConfig } from 'vitest/config';

// Two cores on the CI machine: two workers, and generous timeouts for the training tests
// (speed is measured by `npm run bench`, never asserted in a test).
export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    pool: 'forks',
    maxWorkers: 2,
    testTimeout: 60_000,
    hookTimeout: 60_000,
  },
});
