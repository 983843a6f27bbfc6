// The browser tests' one build (vitest globalSetup, tests/e2e/vitest.config.ts): vite
// builds the workbench into dist/ once before any test file starts, so every file serves
// the same build. SPANWRIGHT_E2E_NO_BUILD=1 serves the dist/ already there.
import { buildWorkbench } from '../../src/cli/serve.js';

export default async function setup(): Promise<void> {
  if (process.env.SPANWRIGHT_E2E_NO_BUILD !== '1') await buildWorkbench();
}
