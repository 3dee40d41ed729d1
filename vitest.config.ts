import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/**/*.test.ts'],
    setupFiles: ['tests/support/property-seed.ts'],
    reporters: ['default', './tests/support/count-reporter.ts'],
    testTimeout: 60_000,
    hookTimeout: 60_000,
  },
});
