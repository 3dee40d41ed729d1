import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['*.check.ts'],
    reporters: ['../count-reporter.ts'],
  },
});
