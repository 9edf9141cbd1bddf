import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    // End-to-end tests run real processes over pseudo-terminals for tens of seconds.
    testTimeout: 60_000,
    hookTimeout: 180_000,
  },
});
