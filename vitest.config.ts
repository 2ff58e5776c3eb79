import { defineConfig } from 'vitest/config';
import { fileURLToPath } from 'node:url';

// Unit tests (tests/engine, tests/unit) need nothing running. Integration and browser tests
// read the service addresses that scripts/test.mjs exports (DATABASE_URL, S3_*, SMTP_*, BASE_URL).
export default defineConfig({
  resolve: { alias: { '~': fileURLToPath(new URL('./src', import.meta.url)) } },
  test: {
    include: ['tests/**/*.test.ts'],
    setupFiles: ['tests/support/http-pool.ts'],
    testTimeout: 60_000,
    hookTimeout: 120_000,
    pool: 'forks',
    maxWorkers: 2,
  },
});
