// The browser workbench's build (vite). Entry: components/index.html; the engine worker
// (workers/engine-worker.ts) is bundled through `new Worker(new URL(...))` in
// components/engine-client.ts; the offline cache (workers/offline-cache.ts) is built as
// `sw.js` at the top of dist/ so its scope covers the whole app.
//
// After the bundle is written, `staticFiles` copies in what the app loads at run time
// from its own origin (nothing is fetched from anywhere else):
//   tfjs-wasm/*.wasm   tfjs-backend-wasm's binaries (the worker calls setWasmPaths here)
//   demo/*             the invented demo data of tiny-models/demo
//   base/*             the shipped base reader of tiny-models/base, when it has been built
// and writes precache.json, the files the offline cache stores on install.
import { copyFileSync, existsSync, mkdirSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { join, relative, sep } from 'node:path';
import { fileURLToPath } from 'node:url';
import { defineConfig, type Plugin } from 'vite';

const here = fileURLToPath(new URL('.', import.meta.url));
const outDir = join(here, 'dist');

const WASM_DIR = join(here, 'node_modules/@tensorflow/tfjs-backend-wasm/dist');
const DEMO_FILES = ['train.jsonl', 'validation.jsonl', 'passages.jsonl', 'train.squad.json', 'validation.squad.json', 'README.md'];
const BASE_FILES = ['config.json', 'model.safetensors', 'vocab.txt', 'tokenizer.json', 'MODEL_CARD.md'];

function copyInto(dir: string, from: string, names: readonly string[]): string[] {
  mkdirSync(join(outDir, dir), { recursive: true });
  const copied: string[] = [];
  for (const name of names) {
    const source = join(from, name);
    if (!existsSync(source)) continue;
    copyFileSync(source, join(outDir, dir, name));
    copied.push(`${dir}/${name}`);
  }
  return copied;
}

function listFiles(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    const path = join(dir, name);
    return statSync(path).isDirectory() ? listFiles(path) : [path];
  });
}

function staticFiles(): Plugin {
  return {
    name: 'spanwright-static-files',
    apply: 'build',
    closeBundle() {
      const wasm = readdirSync(WASM_DIR).filter((n) => n.endsWith('.wasm'));
      copyInto('tfjs-wasm', WASM_DIR, wasm);
      copyInto('demo', join(here, 'tiny-models/demo'), DEMO_FILES);
      const base = copyInto('base', join(here, 'tiny-models/base'), BASE_FILES);
      // the base weights are cached when first used rather than on install (they are large)
      const files = listFiles(outDir)
        .map((p) => relative(outDir, p).split(sep).join('/'))
        .filter((p) => p !== 'sw.js' && p !== 'precache.json' && !p.startsWith('base/') && !p.endsWith('.map'));
      writeFileSync(join(outDir, 'precache.json'), `${JSON.stringify({ files: ['./', ...files], base }, null, 1)}\n`);
    },
  };
}

export default defineConfig({
  root: join(here, 'components'),
  base: './',
  publicDir: false,
  logLevel: 'warn',
  build: {
    outDir,
    emptyOutDir: true,
    target: 'es2022',
    // tfjs-wasm starts its pthread workers from its factory function's source text
    // (Function.prototype.toString); minified, that text names variables of the
    // enclosing bundle and the threads fail with "e is not defined" (seen with vite 8)
    minify: false,
    chunkSizeWarningLimit: 8000,
    rolldownOptions: {
      // the worker's tfjs bundle makes one slow transform; its timing notice is noise here
      checks: { bundlerTimings: false },
      input: { main: join(here, 'components/index.html'), sw: join(here, 'workers/offline-cache.ts') },
      output: { entryFileNames: (chunk) => (chunk.name === 'sw' ? 'sw.js' : 'assets/[name]-[hash].js') },
    },
  },
  worker: { format: 'es' },
  plugins: [staticFiles()],
});
