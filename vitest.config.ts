import { defineConfig } from 'vitest/config';

// Tests run without hardware: the virtual bench in process and behind real pseudo-terminals, and a headless
// Chromium for the dashboard. Timeouts are generous because CI is a loaded 2-core machine; no test asserts on
// speed (benchmarks do, separately).
export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    testTimeout: 60_000,
    hookTimeout: 60_000,
    maxWorkers: 2,
    reporters: ['default'],
  },
});
