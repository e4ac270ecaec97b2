// Test runner configuration of the end-to-end suite (`npm run test:e2e`): real VS Code (code-server) in Chromium.
// Kept apart from vitest.config.mts so `npm test` stays fast; needs scripts/install-code-server.sh and chromium.
import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/e2e/**/*.e2e.ts'],
    testTimeout: 180_000,
    hookTimeout: 300_000,
    pool: 'forks',
    fileParallelism: false,
  },
});
