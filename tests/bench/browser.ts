// defines: runBrowserBench — the engine benchmark in Debian's Chromium: builds the bench
// page (tests/bench/browser/, vite, into tests/bench/.scratch/browser/ with tfjs's wasm
// binaries beside it), serves it with the workbench's own headers (src/cli/serve.ts:
// cross-origin isolated, so tfjs runs its threaded build on a shared heap and the
// kernels' threads work on it in place), and runs browser/step-worker.ts there through
// playwright-core. Nothing is fetched from anywhere but that local server.

import { copyFileSync, existsSync, mkdirSync, readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { startServer } from '../../src/cli/serve.js';
import type { BrowserBenchOptions, BrowserBenchResult } from './browser/step-worker.js';

const here = dirname(fileURLToPath(import.meta.url));
const OUT = join(here, '.scratch', 'browser');
const WASM_DIR = join(here, '..', '..', 'node_modules', '@tensorflow', 'tfjs-backend-wasm', 'dist');
export const CHROMIUM = '/usr/bin/chromium';

async function buildPage(): Promise<void> {
  const { build } = await import('vite');
  await build({
    configFile: false,
    root: join(here, 'browser'),
    base: './',
    logLevel: 'warn',
    // minified, tfjs-wasm's thread workers fail (vite.config.ts says why)
    build: { outDir: OUT, emptyOutDir: true, target: 'es2022', minify: false, chunkSizeWarningLimit: 8000 },
    worker: { format: 'es' },
  });
  mkdirSync(join(OUT, 'tfjs-wasm'), { recursive: true });
  for (const name of readdirSync(WASM_DIR).filter((n) => n.endsWith('.wasm')))
    copyFileSync(join(WASM_DIR, name), join(OUT, 'tfjs-wasm', name));
}

/** The browser figures, or null with the reason when Chromium is not installed. */
export async function runBrowserBench(options: BrowserBenchOptions): Promise<{ result: BrowserBenchResult | null; note: string }> {
  if (!existsSync(CHROMIUM)) return { result: null, note: `no ${CHROMIUM} (apt-get install chromium)` };
  await buildPage();
  const server = await startServer({ root: OUT, port: 0 });
  const { chromium } = await import('playwright-core');
  const browser = await chromium.launch({ executablePath: CHROMIUM, args: ['--no-sandbox'] });
  try {
    const page = await browser.newPage();
    await page.goto(server.url);
    await page.waitForFunction('typeof window.runBench === "function"');
    // a string, not a function: tsx's transform would name helpers the page does not have
    const result = (await page.evaluate(`window.runBench(${JSON.stringify(options)})`)) as BrowserBenchResult;
    return { result, note: '' };
  } finally {
    await browser.close();
    await server.close();
  }
}
