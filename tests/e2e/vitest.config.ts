// vitest settings for the browser end-to-end run (`npm run test:e2e`): one file, one
// browser, steps in order; the unit suite (vitest.config.ts) does not pick it up, since
// the file is named *.e2e.ts rather than *.test.ts.
import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/e2e/**/*.e2e.ts'],
    fileParallelism: false,
    testTimeout: 240_000,
    hookTimeout: 240_000,
  },
});
