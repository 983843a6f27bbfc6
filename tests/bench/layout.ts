// defines: the Linear-weight layout bench — what keeping Linear weights [out, in]
// (PyTorch's layout, products x·Wᵀ; the engine's layout) costs against keeping them
// [in, out] (products x·W; the engine's layout while stock tfjs-wasm ran its products),
// measured in the same run:
//   1. the matrix products a layout changes, on the fast kernels at 1 and N threads,
//      for every Linear layer a span-training step runs (encoder and span head), with
//      R = B·T rows, in the operand order tfjs-core's BatchMatMul gradient gives:
//        [in, out]   forward y = x·W      input grad dx = dy·Wᵀ   weight grad dW = xᵀ·dy
//        [out, in]   forward y = x·Wᵀ     input grad dx = dy·W    weight grad dW = dyᵀ·x
//      a training step runs all three, an inference forward the first. Either layout
//      has one transposed right operand per Linear in training; a transposed operand
//      changes only how the GEMM packs it (kernels.c gemm_f32), never the sums, so the
//      two layouts give the same bits;
//   2. the noise floor: the [in, out] products timed a second time, on a second weight,
//      in the same alternation — a ratio of that size says nothing;
//   3. one real training step and one inference forward of the engine, so the
//      products' difference is also given as a share of a step;
//   4. the transposes the [in, out] layout needs at the checkpoint boundary: one pass
//      over every Linear weight to load weights, three (weights and both AdamW moments)
//      to save or resume a checkpoint, for the bench configs and a BERT-base-sized
//      encoder (12 layers, hidden 768).
// The arms alternate product by product (the order rotates every round) so a burst of
// other work on the shared machine falls on all of them. Each product's figure is its
// median over the rounds (and its minimum, the least disturbed run); the ratios are of
// those summed over a step's products, in wall time and in this process's CPU time
// (every thread's: under a load above the core count the CPU time is the steadier),
// with os.loadavg() beside them.
//
//   npx tsx tests/bench/layout.ts [--rounds N] [--config NAME] [--threads N] [--json]
//   (npm run bench runs it in a process of its own; --skip-layout leaves it out)

import { availableParallelism, loadavg } from 'node:os';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import '@tensorflow/tfjs-backend-wasm';
import { registerFastKernels, registerKernelFixes } from '../../src/kernels/register.js';
import { setKernelThreads } from '../../src/kernels/threads.js';
import { parameterShapes, presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { startKernelThreads } from '../../src/node/kernel-threads.js';
import { trainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';
import { CONFIGS, median, syntheticBatch, VOCAB, type BenchConfig } from './step-timing.js';

/** The arms: the two layouts, and [in, out] again for the noise floor. */
type Arm = 'inOut' | 'outIn' | 'inOutAgain';
const ARMS: Arm[] = ['inOut', 'outIn', 'inOutAgain'];

type Product = 'forward' | 'inputGrad' | 'weightGrad';
const PRODUCTS: Product[] = ['forward', 'inputGrad', 'weightGrad'];

/** Wall and CPU milliseconds of one call. */
interface Timing {
  wallMs: number;
  cpuMs: number;
}

function timed(f: () => void): Timing {
  const c0 = process.cpuUsage();
  const t0 = performance.now();
  f();
  const wallMs = performance.now() - t0;
  const c = process.cpuUsage(c0);
  return { wallMs, cpuMs: (c.user + c.system) / 1000 };
}

/** The distinct [in, out] of the Linear weights a span-training step reads (the encoder's and the span head's), with how many share each. */
function stepLinears(config: ReaderConfig): { inp: number; out: number; count: number }[] {
  const byShape = new Map<string, { inp: number; out: number; count: number }>();
  for (const spec of parameterShapes(config).values()) {
    if (!spec.linear || spec.part === 'mlm_head') continue;
    const [out, inp] = spec.shape;
    const entry = byShape.get(`${inp}x${out}`) ?? { inp, out, count: 0 };
    entry.count += 1;
    byShape.set(`${inp}x${out}`, entry);
  }
  return [...byShape.values()];
}

interface Operands {
  x: tf.Tensor; // [R, in]
  dy: tf.Tensor; // [R, out]
  w: Record<Arm, tf.Tensor>; // [in, out], [out, in], [in, out]
}

/** One product of a Linear layer as `arm` keeps its weight: the timing of the product alone. */
function oneProduct(op: Operands, arm: Arm, product: Product): Timing {
  const { x, dy } = op;
  const w = op.w[arm];
  const inOut = arm !== 'outIn';
  return timed(() => {
    let y: tf.Tensor;
    if (product === 'forward')
      y = inOut ? tf.matMul(x, w) : tf.matMul(x, w, false, true); // [R, out]
    else if (product === 'inputGrad')
      y = inOut ? tf.matMul(dy, w, false, true) : tf.matMul(dy, w); // [R, in]
    else y = inOut ? tf.matMul(x, dy, true, false) : tf.matMul(dy, x, true, false); // [in, out] or [out, in]
    y.dispose();
  });
}

/** Summed per-product medians and minimums of one arm, ms. */
interface ArmSums {
  wall: number;
  cpu: number;
  wallMin: number;
  cpuMin: number;
}

/** One arm against [in, out]: the ratio of the summed medians (and minimums), wall and CPU. */
export interface ArmRatio {
  wall: number;
  cpu: number;
  wallMin: number;
  cpuMin: number;
}

export interface ProductResult {
  /** the summed medians of the [in, out] and [out, in] products, ms */
  inOutMs: number;
  outInMs: number;
  /** [out, in] / [in, out] */
  layout: ArmRatio;
  /** [in, out] again / [in, out]: the noise floor */
  noise: ArmRatio;
}

/**
 * Each product of each distinct Linear shape, `rounds` times per arm, alternating; the
 * median (and minimum) of each, times the layers sharing the shape, summed over a
 * training step's products (all three) and an inference forward's (the first). The
 * operands are made once per shape and reused: in Node over copies that leaves out
 * their copy into the kernel pool's memory, which is the same for every arm.
 */
function linearProducts(config: ReaderConfig, rows: number, rounds: number): { training: ProductResult; inference: ProductResult } {
  const zero = (): Record<Arm, ArmSums> => ({
    inOut: { wall: 0, cpu: 0, wallMin: 0, cpuMin: 0 },
    outIn: { wall: 0, cpu: 0, wallMin: 0, cpuMin: 0 },
    inOutAgain: { wall: 0, cpu: 0, wallMin: 0, cpuMin: 0 },
  });
  const sums = { training: zero(), inference: zero() };
  for (const { inp, out, count } of stepLinears(config)) {
    const op: Operands = {
      x: tf.randomNormal([rows, inp]),
      dy: tf.randomNormal([rows, out]),
      w: { inOut: tf.randomNormal([inp, out]), outIn: tf.randomNormal([out, inp]), inOutAgain: tf.randomNormal([inp, out]) },
    };
    for (const product of PRODUCTS) {
      const times: Record<Arm, Timing[]> = { inOut: [], outIn: [], inOutAgain: [] };
      for (const arm of ARMS) oneProduct(op, arm, product); // warm-up
      for (let r = 0; r < rounds; r++) {
        for (let i = 0; i < ARMS.length; i++) {
          const arm = ARMS[(i + r) % ARMS.length];
          times[arm].push(oneProduct(op, arm, product));
        }
      }
      for (const arm of ARMS) {
        const wall = times[arm].map((t) => t.wallMs);
        const cpu = times[arm].map((t) => t.cpuMs);
        for (const kind of product === 'forward' ? (['training', 'inference'] as const) : (['training'] as const)) {
          const s = sums[kind][arm];
          s.wall += count * median(wall);
          s.cpu += count * median(cpu);
          s.wallMin += count * Math.min(...wall);
          s.cpuMin += count * Math.min(...cpu);
        }
      }
    }
    tf.dispose([op.x, op.dy, ...Object.values(op.w)]);
  }
  const against = (s: ArmSums, base: ArmSums): ArmRatio => ({
    wall: s.wall / base.wall,
    cpu: s.cpu / base.cpu,
    wallMin: s.wallMin / base.wallMin,
    cpuMin: s.cpuMin / base.cpuMin,
  });
  const result = (kind: 'training' | 'inference'): ProductResult => {
    const s = sums[kind];
    return { inOutMs: s.inOut.wall, outInMs: s.outIn.wall, layout: against(s.outIn, s.inOut), noise: against(s.inOutAgain, s.inOut) };
  };
  return { training: result('training'), inference: result('inference') };
}

/** Median wall ms of a real training step and of an inference forward (one batch of the config). */
function engineStep(config: ReaderConfig, bc: BenchConfig, rounds: number): { stepMs: number; forwardMs: number } {
  const tc = trainConfig({
    batchSize: bc.batch,
    gradAccumulation: 1,
    maxLength: bc.seqLen,
    stride: bc.seqLen / 4,
    maxQueryLength: bc.seqLen / 4,
    epochs: 1,
    trimPadding: false,
  });
  const params = ReaderParams.init(config, 1);
  const trainer = new Trainer(params, config, tc, planTraining(tc, 1000 * bc.batch));
  const batch = syntheticBatch(bc.batch, bc.seqLen, config.vocabSize);
  const shape: [number, number] = [bc.batch, bc.seqLen];
  const forward = (): void =>
    tf.tidy(() => {
      const inputs = {
        inputIds: tf.tensor2d(batch.inputIds, shape, 'int32'),
        tokenTypeIds: tf.tensor2d(batch.tokenTypeIds, shape, 'int32'),
        attentionMask: tf.tensor2d(batch.attentionMask, shape, 'int32'),
      };
      spanLogits(params, config, inputs, { training: false }).start.dataSync();
    });
  try {
    trainer.step([batch]);
    forward();
    const steps: number[] = [];
    const forwards: number[] = [];
    for (let r = 0; r < rounds; r++) {
      steps.push(timed(() => trainer.step([batch])).wallMs);
      forwards.push(timed(forward).wallMs);
    }
    return { stepMs: median(steps), forwardMs: median(forwards) };
  } finally {
    trainer.dispose();
    params.dispose();
  }
}

/** [rows, cols] → [cols, rows] of row-major data: the loop the [in, out] layout ran at the checkpoint boundary. */
function transposed(data: Float32Array, rows: number, cols: number): Float32Array {
  const t = new Float32Array(rows * cols);
  for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) t[c * rows + r] = data[r * cols + c];
  return t;
}

export interface BoundaryCost {
  name: string;
  /** Linear weights, millions of floats */
  linearMFloats: number;
  /** median ms of one transpose of every Linear weight: loading weights is one pass, saving or resuming a checkpoint three */
  passMs: number;
}

/** One pass of the boundary's transposes over a model's Linear weights, median of 3 after one warm-up. */
function boundaryCost(name: string, config: ReaderConfig): BoundaryCost {
  const weights = [...parameterShapes(config).values()]
    .filter((s) => s.linear)
    .map((s) => ({ rows: s.shape[0], cols: s.shape[1], data: new Float32Array(s.shape[0] * s.shape[1]).fill(0.5) }));
  const pass = (): number => timed(() => weights.forEach((w) => transposed(w.data, w.rows, w.cols))).wallMs;
  pass();
  return { name, linearMFloats: weights.reduce((n, w) => n + w.data.length, 0) / 1e6, passMs: median([pass(), pass(), pass()]) };
}

export interface LayoutConfigResult {
  name: string;
  threads: number;
  training: ProductResult;
  inference: ProductResult;
  /** the engine's step and inference forward, ms */
  stepMs: number;
  forwardMs: number;
  loadBefore: number[];
  loadAfter: number[];
}

export interface LayoutBenchResult {
  configs: LayoutConfigResult[];
  boundary: BoundaryCost[];
}

const load = (): number[] => loadavg().map((x) => Math.round(x * 100) / 100);

export async function runLayoutBench(opts: { rounds: number; only: string | null; threads: number }): Promise<LayoutBenchResult> {
  await tf.setBackend('wasm');
  await tf.ready();
  registerKernelFixes();
  registerFastKernels();
  const N = await startKernelThreads(opts.threads, tf.backend() as never);
  const configs: LayoutConfigResult[] = [];
  const boundary: BoundaryCost[] = [];
  for (const bc of CONFIGS) {
    if (opts.only && opts.only !== bc.name) continue;
    const config = presetConfig(bc.preset, VOCAB);
    for (const threads of N > 1 ? [1, N] : [1]) {
      const loadBefore = load();
      setKernelThreads(threads);
      const { training, inference } = linearProducts(config, bc.batch * bc.seqLen, opts.rounds);
      const { stepMs, forwardMs } = engineStep(config, bc, 3);
      configs.push({ name: bc.name, threads, training, inference, stepMs, forwardMs, loadBefore, loadAfter: load() });
    }
    boundary.push(boundaryCost(bc.name, config));
  }
  if (!opts.only) {
    // BERT-base's encoder (Devlin et al. 2019: 12 layers, hidden 768, 12 heads, feed-forward 3072)
    const base = presetConfig('small', VOCAB, { numLayers: 12, hiddenSize: 768, numHeads: 12, intermediateSize: 3072 });
    boundary.push(boundaryCost('L12-H768 (BERT-base)', base));
  }
  return { configs, boundary };
}

export function printLayoutTable(r: LayoutBenchResult): void {
  const f = (x: number) => x.toFixed(3);
  console.log(
    'layout: Linear weights [out, in] (x·Wᵀ, the engine) against [in, out] (x·W), ratio [out, in] / [in, out]; noise = [in, out] against itself',
  );
  console.log(
    'config              threads  products    [out, in]: wall  min    CPU    min     noise: wall  min    CPU    min     Δ of the engine',
  );
  for (const c of r.configs) {
    const row = (what: string, p: ProductResult, ms: number, of: string): void => {
      const share = (100 * (p.outInMs - p.inOutMs)) / ms;
      console.log(
        `${c.name.padEnd(20)}${String(c.threads).padEnd(9)}${what.padEnd(23)}` +
          `${f(p.layout.wall)}  ${f(p.layout.wallMin)}  ${f(p.layout.cpu)}  ${f(p.layout.cpuMin)}          ` +
          `${f(p.noise.wall)}  ${f(p.noise.wallMin)}  ${f(p.noise.cpu)}  ${f(p.noise.cpuMin)}   ` +
          `${share >= 0 ? '+' : ''}${share.toFixed(1)}% of a ${ms.toFixed(0)} ms ${of}`,
      );
    };
    row('training', c.training, c.stepMs, 'step');
    row('inference', c.inference, c.forwardMs, 'forward');
    console.log(
      `${c.name.padEnd(20)}${String(c.threads).padEnd(9)}load average ${c.loadBefore.join(' ')} before, ${c.loadAfter.join(' ')} after`,
    );
  }
  console.log('layout: the transposes [in, out] needs at the checkpoint boundary ([out, in] needs none):');
  for (const b of r.boundary) {
    console.log(
      `${b.name.padEnd(22)}${b.linearMFloats.toFixed(2)} M floats of Linear weights, ${b.passMs.toFixed(1)} ms a pass: ` +
        `loading weights ${b.passMs.toFixed(1)} ms, saving or resuming a checkpoint (weights + 2 moments) ${(3 * b.passMs).toFixed(1)} ms`,
    );
  }
}

function parseArgs(argv: string[]): { rounds: number; only: string | null; threads: number; json: boolean } {
  const at = (flag: string): number => argv.indexOf(flag);
  return {
    rounds: at('--rounds') >= 0 ? Number(argv[at('--rounds') + 1]) : 9,
    only: at('--config') >= 0 ? argv[at('--config') + 1] : null,
    threads: at('--threads') >= 0 ? Number(argv[at('--threads') + 1]) : availableParallelism(),
    json: argv.includes('--json'),
  };
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const opts = parseArgs(process.argv.slice(2));
  const result = await runLayoutBench(opts);
  printLayoutTable(result);
  if (opts.json) console.log(JSON.stringify({ layout: result }));
}
