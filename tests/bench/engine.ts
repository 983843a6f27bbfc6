// defines: the engine benchmark — training-step throughput of the real reader
// (src/model/encoder.ts) and trainer (src/train/trainer.ts) on the wasm backend with
// the fast kernels, against references measured in the same run:
//   engine      wasm + registerFastKernels()
//   stock_wasm  wasm + restoreStockKernels() (stock tfjs ops; the kernel fixes that
//               stock wasm needs to train at all stay on, see src/kernels/register.ts)
//   cpu         tfjs 'cpu' backend (very slow: one timed step)
//   torch       PyTorch, one thread (tests/bench/torch_step.py via /usr/bin/python3)
// plus a plain-GEMM peak on wasm, the share of it a step reaches, the peak wasm heap,
// and the forward latency of one 384-token window.
//
//   npx tsx tests/bench/engine.ts [--json] [--skip-cpu] [--skip-stock] [--steps N] [--config NAME]
//
// Step time is the median of N timed steps after one warm-up step. Model FLOPs count
// the matrix products only (3× the forward: forward, input gradient, weight gradient).

import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import '@tensorflow/tfjs-backend-wasm';
import { registerFastKernels, registerKernelFixes, restoreStockKernels } from '../../src/kernels/register.js';
import { presetConfig, type PresetName, type ReaderConfig } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import type { SpanBatch } from '../../src/train/batches.js';
import { trainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';

const here = dirname(fileURLToPath(import.meta.url));

/** 30522: BERT's uncased vocabulary; the shipped tiny vocabulary is of the same order (~30 000). */
const VOCAB = 30522;

interface BenchConfig {
  name: string;
  preset: PresetName;
  seqLen: number;
  batch: number;
}

const CONFIGS: BenchConfig[] = [
  { name: 'L2-H128-T256-B16', preset: 'tiny', seqLen: 256, batch: 16 },
  { name: 'L4-H256-T384-B8', preset: 'small', seqLen: 384, batch: 8 },
];

export interface ConfigResult {
  name: string;
  tokens_per_s: { engine: number | null; stock_wasm: number | null; cpu: number | null; torch: number | null };
  step_ms: { engine: number | null; stock_wasm: number | null; cpu: number | null; torch: number | null };
  peak_fraction: number | null;
  heap_peak_bytes: number;
  forward_ms_384: number | null;
  model_gflop_per_step: number;
}

export interface EngineBenchResult {
  gemm_peak_gflops: number;
  configs: ConfigResult[];
}

/** Matrix-product FLOPs of one training step (3 × forward). */
function stepFlops(config: ReaderConfig, B: number, T: number): number {
  const H = config.hiddenSize;
  const I = config.intermediateSize;
  const perLayer = 2 * B * T * (4 * H * H + 2 * H * I) + 2 * 2 * B * T * T * H; // linears + QKᵀ and PV
  const head = 2 * B * T * H * 2;
  return 3 * (config.numLayers * perLayer + head);
}

function syntheticBatch(B: number, T: number, vocab: number): SpanBatch {
  const inputIds = new Int32Array(B * T);
  for (let i = 0; i < inputIds.length; i++) inputIds[i] = 5 + ((i * 7919) % (vocab - 5));
  const tokenTypeIds = new Int32Array(B * T).map((_, i) => (i % T > T / 4 ? 1 : 0));
  return {
    size: B,
    seqLen: T,
    inputIds,
    tokenTypeIds,
    attentionMask: new Int32Array(B * T).fill(1),
    startPositions: new Int32Array(B).fill(T / 2),
    endPositions: new Int32Array(B).fill(T / 2 + 2),
  };
}

let heapPeak = 0;
function noteHeap(): void {
  const backend = tf.backend() as unknown as { wasm?: { HEAPU8: Uint8Array } };
  const wasmBytes = backend.wasm ? backend.wasm.HEAPU8.buffer.byteLength : 0;
  heapPeak = Math.max(heapPeak, wasmBytes, tf.memory().numBytes);
}

/** Median step time (ms) of the real trainer on the current backend. */
function timeSteps(config: ReaderConfig, bc: BenchConfig, warmup: number, timed: number): number {
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
  try {
    for (let i = 0; i < warmup; i++) trainer.step([batch]);
    const times: number[] = [];
    for (let i = 0; i < timed; i++) {
      const t0 = performance.now();
      trainer.step([batch]);
      times.push(performance.now() - t0);
      noteHeap();
    }
    times.sort((a, b) => a - b);
    return times[Math.floor(times.length / 2)];
  } finally {
    trainer.dispose();
    params.dispose();
  }
}

/** Forward (eval mode) latency of one window of 384 tokens, median of 5. */
function forward384(config: ReaderConfig): number {
  const params = ReaderParams.init(config, 2);
  const b = syntheticBatch(1, 384, config.vocabSize);
  const shape: [number, number] = [1, 384];
  const run = () =>
    tf.tidy(() => {
      const inputs = {
        inputIds: tf.tensor2d(b.inputIds, shape, 'int32'),
        tokenTypeIds: tf.tensor2d(b.tokenTypeIds, shape, 'int32'),
        attentionMask: tf.tensor2d(b.attentionMask, shape, 'int32'),
      };
      const { start } = spanLogits(params, config, inputs, { training: false });
      start.dataSync();
    });
  try {
    run();
    const times: number[] = [];
    for (let i = 0; i < 5; i++) {
      const t0 = performance.now();
      run();
      times.push(performance.now() - t0);
    }
    times.sort((x, y) => x - y);
    return times[2];
  } finally {
    params.dispose();
  }
}

/** Best GFLOP/s of a plain 2-D 512³ product on wasm, fast kernel or stock XNNPACK. */
function gemmPeak(): number {
  const n = 512;
  const a = tf.randomUniform([n, n]);
  const b = tf.randomUniform([n, n]);
  let best = 0;
  for (const fast of [true, false]) {
    if (fast) registerFastKernels();
    else restoreStockKernels();
    for (let rep = 0; rep < 6; rep++) {
      const t0 = performance.now();
      const c = tf.matMul(a, b);
      c.dataSync();
      const ms = performance.now() - t0;
      c.dispose();
      if (rep > 0) best = Math.max(best, (2 * n * n * n) / ms / 1e6);
    }
  }
  tf.dispose([a, b]);
  return best;
}

function torchTokensPerS(config: ReaderConfig, bc: BenchConfig): { tokensPerS: number | null; stepMs: number | null; note: string } {
  const python = '/usr/bin/python3';
  if (!existsSync(python)) return { tokensPerS: null, stepMs: null, note: 'no /usr/bin/python3' };
  const probe = spawnSync(python, ['-c', 'import torch'], { encoding: 'utf8' });
  if (probe.status !== 0) return { tokensPerS: null, stepMs: null, note: 'python3-torch is not installed (apt-get install python3-torch)' };
  const args = [
    join(here, 'torch_step.py'),
    '--layers',
    String(config.numLayers),
    '--hidden',
    String(config.hiddenSize),
    '--heads',
    String(config.numHeads),
    '--intermediate',
    String(config.intermediateSize),
    '--seq',
    String(bc.seqLen),
    '--batch',
    String(bc.batch),
    '--vocab',
    String(config.vocabSize),
  ];
  const run = spawnSync(python, args, { encoding: 'utf8', env: { ...process.env, OMP_NUM_THREADS: '1' } });
  const line = run.stdout.trim().split('\n').pop() ?? '';
  try {
    const parsed = JSON.parse(line) as { tokens_per_s: number; step_s: number };
    return { tokensPerS: parsed.tokens_per_s, stepMs: parsed.step_s * 1000, note: '' };
  } catch {
    return { tokensPerS: null, stepMs: null, note: `torch_step.py failed: ${run.stderr.trim().split('\n').pop()}` };
  }
}

export interface EngineBenchOptions {
  skipCpu: boolean;
  skipStock: boolean;
  steps: number;
  only: string | null;
}

export async function runEngineBench(opts: EngineBenchOptions): Promise<EngineBenchResult> {
  await tf.setBackend('wasm');
  await tf.ready();
  registerKernelFixes();
  const peak = gemmPeak();
  const results: ConfigResult[] = [];
  for (const bc of CONFIGS) {
    if (opts.only && opts.only !== bc.name) continue;
    const config = presetConfig(bc.preset, VOCAB);
    const tokens = bc.batch * bc.seqLen;
    heapPeak = 0;

    await tf.setBackend('wasm');
    registerFastKernels();
    const engineMs = timeSteps(config, bc, 1, opts.steps);
    const fwd = forward384(config);
    const engineHeap = heapPeak;

    let stockMs: number | null = null;
    if (!opts.skipStock) {
      restoreStockKernels();
      stockMs = timeSteps(config, bc, 1, 1);
      registerFastKernels();
    }

    let cpuMs: number | null = null;
    if (!opts.skipCpu) {
      await tf.setBackend('cpu');
      cpuMs = timeSteps(config, bc, 0, 1);
      await tf.setBackend('wasm');
    }

    const torch = torchTokensPerS(config, bc);
    if (torch.note) console.error(`${bc.name}: torch row skipped: ${torch.note}`);
    const flops = stepFlops(config, bc.batch, bc.seqLen);
    const perS = (ms: number | null) => (ms === null ? null : tokens / (ms / 1000));
    results.push({
      name: bc.name,
      tokens_per_s: { engine: perS(engineMs), stock_wasm: perS(stockMs), cpu: perS(cpuMs), torch: torch.tokensPerS },
      step_ms: { engine: engineMs, stock_wasm: stockMs, cpu: cpuMs, torch: torch.stepMs },
      peak_fraction: flops / (engineMs / 1000) / 1e9 / peak,
      heap_peak_bytes: engineHeap,
      forward_ms_384: fwd,
      model_gflop_per_step: flops / 1e9,
    });
  }
  return { gemm_peak_gflops: peak, configs: results };
}

function fmt(x: number | null, digits = 0): string {
  return x === null ? '—' : x.toFixed(digits);
}

export function printEngineTable(r: EngineBenchResult): void {
  console.log(`plain 2-D GEMM peak on wasm (512³, best of fast kernel and stock XNNPACK): ${r.gemm_peak_gflops.toFixed(1)} GFLOP/s`);
  console.log('config              row         step ms    tokens/s');
  for (const c of r.configs) {
    for (const row of ['engine', 'stock_wasm', 'cpu', 'torch'] as const) {
      console.log(`${c.name.padEnd(20)}${row.padEnd(12)}${fmt(c.step_ms[row]).padStart(8)}${fmt(c.tokens_per_s[row]).padStart(12)}`);
    }
    const t = c.tokens_per_s;
    const ratio = (a: number | null, b: number | null) => (a === null || b === null ? '—' : (a / b).toFixed(2));
    console.log(
      `${c.name.padEnd(20)}engine/stock ${ratio(t.engine, t.stock_wasm)}×  engine/torch ${ratio(t.engine, t.torch)}  ` +
        `engine/cpu ${ratio(t.engine, t.cpu)}×  peak fraction ${fmt(c.peak_fraction, 2)}  ` +
        `(${c.model_gflop_per_step.toFixed(1)} GFLOP/step)  heap peak ${(c.heap_peak_bytes / 2 ** 20).toFixed(0)} MiB  ` +
        `forward 384 tokens ${fmt(c.forward_ms_384, 1)} ms`,
    );
  }
}

export function engineJson(r: EngineBenchResult): string {
  return JSON.stringify({
    gemm_peak_gflops: r.gemm_peak_gflops,
    configs: r.configs.map((c) => ({
      name: c.name,
      tokens_per_s: c.tokens_per_s,
      peak_fraction: c.peak_fraction,
      heap_peak_bytes: c.heap_peak_bytes,
      forward_ms_384: c.forward_ms_384,
    })),
  });
}

function parseArgs(argv: string[]): EngineBenchOptions & { json: boolean } {
  const stepsAt = argv.indexOf('--steps');
  const configAt = argv.indexOf('--config');
  return {
    json: argv.includes('--json'),
    skipCpu: argv.includes('--skip-cpu'),
    skipStock: argv.includes('--skip-stock'),
    steps: stepsAt >= 0 ? Number(argv[stepsAt + 1]) : 3,
    only: configAt >= 0 ? argv[configAt + 1] : null,
  };
}

export async function main(argv: string[]): Promise<void> {
  const opts = parseArgs(argv);
  const result = await runEngineBench(opts);
  printEngineTable(result);
  if (opts.json) console.log(engineJson(result));
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  await main(process.argv.slice(2));
}
