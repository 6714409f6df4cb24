import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    reporters: ['default', './test/closing-line-reporter.ts'],
    testTimeout: 60_000,
    hookTimeout: 120_000,
    // Solver tests are CPU-bound; two workers match the 2-core CI machine.
    pool: 'forks',
    maxWorkers: 2,
  },
});
