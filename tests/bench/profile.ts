// defines: the per-kernel profile of one training step on wasm with the fast kernels —
// where the step's time goes, kernel by kernel (tf.profile), to decide what to fuse next.
//
//   npx tsx tests/bench/profile.ts [--config L2-H128-T256-B16 | L4-H256-T384-B8] [--top N] [--threads N]
//
// Times are tfjs's own kernelTimeMs (wall time around each kernel on wasm), summed per
// kernel name over one step after a warm-up step; "other" is the step's wall time not
// spent inside any kernel (tape bookkeeping, allocation). tf.customGrad's wrapper
// around each fused op is listed by tfjs as a kernel named "forward"; its time is
// the fused kernel's again, so it is shown apart and left out of the totals.

import * as tf from '@tensorflow/tfjs';
import '@tensorflow/tfjs-backend-wasm';
import { startKernelThreads } from '../../src/node/kernel-threads.js';
import { registerFastKernels } from '../../src/kernels/register.js';
import { presetConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import type { SpanBatch } from '../../src/train/batches.js';
import { trainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';

const argv = process.argv.slice(2);
const configAt = argv.indexOf('--config');
const topAt = argv.indexOf('--top');
const name = configAt >= 0 ? argv[configAt + 1] : 'L2-H128-T256-B16';
const top = topAt >= 0 ? Number(argv[topAt + 1]) : 20;
const bench = name === 'L4-H256-T384-B8' ? { preset: 'small' as const, T: 384, B: 8 } : { preset: 'tiny' as const, T: 256, B: 16 };

await tf.setBackend('wasm');
await tf.ready();
registerFastKernels();
const threadsAt = argv.indexOf('--threads');
const threads = threadsAt >= 0 ? Number(argv[threadsAt + 1]) : 1;
if (threads > 1) await startKernelThreads(threads, tf.backend() as never);

const config = presetConfig(bench.preset, 30522);
const tc = trainConfig({
  batchSize: bench.B,
  gradAccumulation: 1,
  maxLength: bench.T,
  stride: bench.T / 4,
  maxQueryLength: bench.T / 4,
  epochs: 1,
  trimPadding: false,
});
const params = ReaderParams.init(config, 1);
const trainer = new Trainer(params, config, tc, planTraining(tc, 1000 * bench.B));
const { B, T } = bench;
const batch: SpanBatch = {
  size: B,
  seqLen: T,
  inputIds: new Int32Array(B * T).map((_, i) => 5 + ((i * 7919) % (config.vocabSize - 5))),
  tokenTypeIds: new Int32Array(B * T).map((_, i) => (i % T > T / 4 ? 1 : 0)),
  attentionMask: new Int32Array(B * T).fill(1),
  startPositions: new Int32Array(B).fill(T / 2),
  endPositions: new Int32Array(B).fill(T / 2 + 2),
};

trainer.step([batch]);
const t0 = performance.now();
const info = await tf.profile(() => {
  trainer.step([batch]);
});
const wall = performance.now() - t0;
const perKernel = new Map<string, { ms: number; calls: number }>();
let inKernels = 0;
let wrappers = 0;
for (const k of info.kernels) {
  const ms = typeof k.kernelTimeMs === 'number' ? k.kernelTimeMs : 0;
  if (k.name === 'forward') {
    wrappers += ms;
    continue;
  }
  const row = perKernel.get(k.name) ?? { ms: 0, calls: 0 };
  row.ms += ms;
  row.calls += 1;
  perKernel.set(k.name, row);
  inKernels += ms;
}
console.log(
  `${name} on ${threads} thread(s): one profiled step ${wall.toFixed(0)} ms wall (profiling adds overhead), ${inKernels.toFixed(0)} ms in kernels, peak ${(info.peakBytes / 2 ** 20).toFixed(0)} MiB`,
);
console.log('kernel                      ms   calls');
for (const [kernel, row] of [...perKernel].sort((a, b) => b[1].ms - a[1].ms).slice(0, top)) {
  console.log(`${kernel.padEnd(24)}${row.ms.toFixed(1).padStart(7)}${String(row.calls).padStart(8)}`);
}
console.log(`${'other (outside kernels)'.padEnd(24)}${(wall - inKernels).toFixed(1).padStart(7)}`);
console.log(`(tf.customGrad wrappers around the fused ops, not counted above: ${wrappers.toFixed(1)} ms)`);
trainer.dispose();
params.dispose();
