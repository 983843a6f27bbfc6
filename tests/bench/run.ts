// defines: `npm run bench` — every benchmark in one run.
//   1. the tokenizer bench (tests/bench/tokenize.ts, another stage's), when present,
//      in its own process so the two do not share a heap
//   2. with --quality only (it trains for hours: 7 rows × 2 sets × 3 seeds): the
//      ablation table of the reader's stages (ablation.ts; --seeds, --rows, --sets narrow
//      it), with --json one `{"ablation": …}` line; with --curves, the learning curves of
//      the shipped base (quality.ts, 10–15 minutes), with --json one `{"quality": …}` line
//   3. the Linear-weight layout bench (layout.ts: [out, in] against [in, out], products
//      and the checkpoint boundary's transposes), in its own process as it starts its
//      own kernel threads; --skip-layout leaves it out
//   4. the engine bench (engine.ts), last, so with --json its JSON object is the
//      LAST line of the output
// Arguments are passed to all (e.g. --json, --skip-cpu).

import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { main as engineMain } from './engine.js';

const here = dirname(fileURLToPath(import.meta.url));
const args = process.argv.slice(2);
const tsx = join(here, '..', '..', 'node_modules', '.bin', 'tsx');

const tokenizeBench = join(here, 'tokenize.ts');
if (existsSync(tokenizeBench)) {
  const r = spawnSync(tsx, [tokenizeBench, ...args.filter((a) => a !== '--json')], { stdio: 'inherit' });
  if (r.status !== 0) console.error(`tests/bench/tokenize.ts exited with ${r.status}`);
} else {
  console.log('tokenizer bench: tests/bench/tokenize.ts not present, skipped');
}

if (!args.includes('--skip-layout')) {
  const r = spawnSync(tsx, [join(here, 'layout.ts'), ...args.filter((a) => a !== '--json')], { stdio: 'inherit' });
  if (r.status !== 0) console.error(`tests/bench/layout.ts exited with ${r.status}`);
}

if (args.includes('--quality')) {
  const { main: ablationMain } = await import('./ablation.js');
  await ablationMain(args);
}
if (args.includes('--curves')) {
  const { main: qualityMain } = await import('./quality.js');
  await qualityMain(args);
}

await engineMain(args);
