import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    globalSetup: ['test/global-setup.ts'],
    testTimeout: 120_000,
    hookTimeout: 300_000,
    pool: 'forks',
    reporters: ['default', 'json'],
    outputFile: { json: 'reports/test-results.json' },
  },
});
