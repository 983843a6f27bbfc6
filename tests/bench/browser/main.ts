// defines: the bench page — starts the step worker and offers window.runBench(options),
// which resolves with the worker's figures (tests/bench/browser.ts calls it).
import type { BrowserBenchOptions, BrowserBenchResult } from './step-worker.js';

const page = window as unknown as { runBench(options: BrowserBenchOptions): Promise<BrowserBenchResult> };

page.runBench = (options) =>
  new Promise((resolve, reject) => {
    const worker = new Worker(new URL('./step-worker.ts', import.meta.url), { type: 'module', name: 'spanwright-bench' });
    worker.onmessage = (e: MessageEvent<{ ok: boolean; result?: BrowserBenchResult; error?: string }>) => {
      worker.terminate();
      if (e.data.ok) resolve(e.data.result!);
      else reject(new Error(e.data.error));
    };
    worker.onerror = (e) => reject(new Error(`the bench worker failed: ${e.message}`));
    worker.postMessage(options);
  });
