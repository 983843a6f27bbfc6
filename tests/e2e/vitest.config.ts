// vitest settings for the browser end-to-end run (`npm run test:e2e`): the workbench is
// built once (build.ts), then the files run one after another, each with its own browser
// and steps in order; the unit suite (vitest.config.ts) does not pick them up, since
// they are named *.e2e.ts rather than *.test.ts.
import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/e2e/**/*.e2e.ts'],
    globalSetup: ['tests/e2e/build.ts'],
    fileParallelism: false,
    testTimeout: 240_000,
    hookTimeout: 240_000,
  },
});
