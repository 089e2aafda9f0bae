import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    testTimeout: 60_000,
    hookTimeout: 60_000,
    pool: 'forks',
    // Stops the real Slurm the scheduler suites started (test/slurm/cluster.ts), after all files.
    globalSetup: ['test/slurm/teardown.ts'],
  },
});
