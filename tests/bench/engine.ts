// defines: the engine benchmark — training-step throughput of the real reader
// (src/model/encoder.ts) and trainer (src/train/trainer.ts) on the wasm backend with
// the fast kernels, on one thread and on all N cores, against references measured in
// the same run:
//   engine_1    wasm + registerFastKernels(), kernel threads set to 1, in Node
//   engine_N    the same with N kernel threads (src/kernels/threads.ts; N = every core):
//               in Node the pool copies operands into its own shared memory
//   browser_1,  the same steps in Debian's Chromium, set up as the workbench is
//   browser_N   (browser.ts): tfjs's threaded build, the kernels in place on its shared
//               heap, relaxed SIMD where Chromium has it; --skip-browser leaves them out
//   stock_wasm  wasm + restoreStockKernels() (stock tfjs ops; the kernel fixes that
//               stock wasm needs to train at all stay on, see src/kernels/register.ts)
//   cpu         tfjs 'cpu' backend (very slow: one timed step)
//   torch_1     PyTorch on one thread (tests/bench/torch_step.py via /usr/bin/python3)
//   torch_N     PyTorch on N threads: the fastest of torch.set_num_threads(N) with
//               OpenBLAS's default threads, with OPENBLAS_NUM_THREADS=1, and
//               set_num_threads(1) with OPENBLAS_NUM_THREADS=N (Debian's torch does its
//               matrix products in OpenBLAS; set_num_threads(N) alone runs N OpenMP
//               threads that each call a threaded OpenBLAS, which is slower here)
// plus the plain-GEMM peak on wasm at 1 and N threads, the share of the 1-thread peak a
// step reaches, the cost of one shared job, the peak wasm heap, the forward latency of
// one 384-token window, and the machine's load average (os.loadavg) beside each config:
// the machine is shared, so figures taken under load say so.
//
//   npx tsx tests/bench/engine.ts [--json] [--skip-cpu] [--skip-stock] [--skip-browser] [--steps N] [--config NAME] [--threads N]
//
// Step times: after two warm-up steps, N rounds (--steps, default 5) of one step on one
// thread then one on N threads, alternating so that a burst of other work on the
// machine falls on both; each figure is the median of its N steps. PyTorch: each
// setting twice, alternating, the median of all their timed steps. Model FLOPs count
// the matrix products only (3× the forward: forward, input gradient, weight gradient).

import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { availableParallelism, loadavg } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import '@tensorflow/tfjs-backend-wasm';
import { startKernelThreads } from '../../src/node/kernel-threads.js';
import { setJobSharing } from '../../src/kernels/jobs.js';
import { registerFastKernels, registerKernelFixes, restoreStockKernels } from '../../src/kernels/register.js';
import { kernelPoolFor, kernelThreadCount, setKernelThreads } from '../../src/kernels/threads.js';
import { fastModuleFor, type WasmBackendLike } from '../../src/kernels/wasm-module.js';
import { presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { runBrowserBench } from './browser.js';
import type { BrowserBenchResult } from './browser/step-worker.js';
import { CONFIGS, gemmGflops, median, syntheticBatch, timeSteps, VOCAB, type BenchConfig } from './step-timing.js';

const here = dirname(fileURLToPath(import.meta.url));

/** The goals (issue 14): engine on N threads ≥ 0.5× PyTorch on N, and ≥ 1.7× its own one thread on 2 cores. */
const GOAL_VS_TORCH = 0.5;
const GOAL_SCALING_2 = 1.7;

const ROWS = ['engine_1', 'engine_N', 'browser_1', 'browser_N', 'stock_wasm', 'cpu', 'torch_1', 'torch_N'] as const;
type Row = (typeof ROWS)[number];

export interface ConfigResult {
  name: string;
  tokens_per_s: Record<Row, number | null>;
  step_ms: Record<Row, number | null>;
  /** engine_N / engine_1, and that over N (Node); browser_N / browser_1 */
  engine_speedup: number;
  engine_efficiency: number;
  browser_speedup: number | null;
  torch_speedup: number | null;
  torch_efficiency: number | null;
  /** the PyTorch setting torch_N is */
  torch_n_setting: string;
  peak_fraction: number | null;
  heap_peak_bytes: number;
  /** the kernel pool's own shared memory after the config (Node: workspaces, operand cache, copies) */
  pool_bytes: number;
  /** per N-thread step in Node: shared jobs, the time inside them, and the copies in and out of the pool's memory */
  pool_per_step: { jobs: number; job_ms: number; copy_mb: number; copy_ms: number } | null;
  forward_ms_384: number | null;
  model_gflop_per_step: number;
  /** os.loadavg() when the config started and ended */
  load_before: number[];
  load_after: number[];
}

export interface EngineBenchResult {
  threads: number;
  relaxed_simd: boolean;
  /** the Chromium run's setup and GEMM figures (its step times are in the configs' rows) */
  browser: BrowserBenchResult | null;
  gemm_peak_gflops: number;
  gemm_peak_gflops_n: number;
  shared_job_us: number;
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

let heapPeak = 0;
function noteHeap(): void {
  const backend = tf.backend() as unknown as { wasm?: { HEAPU8: Uint8Array } };
  const wasmBytes = backend.wasm ? backend.wasm.HEAPU8.buffer.byteLength : 0;
  heapPeak = Math.max(heapPeak, wasmBytes, tf.memory().numBytes);
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
    return median(times);
  } finally {
    params.dispose();
  }
}

/** Best GFLOP/s of a plain 2-D 512³ product on wasm: the fast kernel on `threads` threads, and (1 thread) stock XNNPACK. */
function gemmPeak(threads: number): number {
  let best = gemmGflops(threads);
  if (threads === 1) {
    restoreStockKernels();
    best = Math.max(best, gemmGflops(1));
    registerFastKernels();
  }
  return best;
}

/** Microseconds one small product (64³) takes more when shared with the kernel threads than on this thread. */
function sharedJobCost(threads: number): number {
  const x = tf.randomUniform([64, 64]);
  setKernelThreads(threads);
  const per = (mode: 'auto' | 'always'): number => {
    setJobSharing(mode);
    const times: number[] = [];
    for (let r = 0; r < 5; r++) {
      const t0 = performance.now();
      for (let i = 0; i < 200; i++) tf.matMul(x, x).dispose();
      times.push(((performance.now() - t0) / 200) * 1000);
    }
    return median(times);
  };
  per('auto');
  const cost = per('always') - per('auto');
  setJobSharing('auto');
  x.dispose();
  return cost;
}

interface TorchRun {
  stepMs: number | null;
  times: number[];
  note: string;
}

function torchSteps(config: ReaderConfig, bc: BenchConfig, threads: number, blasThreads: number | null, steps: number): TorchRun {
  const python = '/usr/bin/python3';
  const args = [
    join(here, 'torch_step.py'),
    ...['--layers', String(config.numLayers), '--hidden', String(config.hiddenSize), '--heads', String(config.numHeads)],
    ...['--intermediate', String(config.intermediateSize), '--seq', String(bc.seqLen), '--batch', String(bc.batch)],
    ...['--vocab', String(config.vocabSize), '--steps', String(steps), '--threads', String(threads)],
  ];
  const env: NodeJS.ProcessEnv = { ...process.env, OMP_NUM_THREADS: String(threads) };
  if (blasThreads === null) delete env.OPENBLAS_NUM_THREADS;
  else env.OPENBLAS_NUM_THREADS = String(blasThreads);
  const run = spawnSync(python, args, { encoding: 'utf8', env });
  const line = run.stdout.trim().split('\n').pop() ?? '';
  try {
    const parsed = JSON.parse(line) as { step_s: number; times_s: number[] };
    return { stepMs: parsed.step_s * 1000, times: parsed.times_s.map((s) => s * 1000), note: '' };
  } catch {
    return { stepMs: null, times: [], note: `torch_step.py failed: ${run.stderr.trim().split('\n').pop()}` };
  }
}

/** PyTorch on 1 and on N threads (the fastest setting for N), each setting run twice, alternating. */
function torchRows(
  config: ReaderConfig,
  bc: BenchConfig,
  n: number,
  steps: number,
): { one: number | null; many: number | null; setting: string; note: string } {
  const python = '/usr/bin/python3';
  if (!existsSync(python)) return { one: null, many: null, setting: '', note: 'no /usr/bin/python3' };
  const probe = spawnSync(python, ['-c', 'import torch'], { encoding: 'utf8' });
  if (probe.status !== 0)
    return { one: null, many: null, setting: '', note: 'python3-torch is not installed (apt-get install python3-torch)' };
  const settings: { label: string; threads: number; blas: number | null }[] = [
    { label: 'torch.set_num_threads(1), OPENBLAS_NUM_THREADS=1', threads: 1, blas: 1 },
    { label: `torch.set_num_threads(${n})`, threads: n, blas: null },
    { label: `torch.set_num_threads(${n}), OPENBLAS_NUM_THREADS=1`, threads: n, blas: 1 },
    { label: `torch.set_num_threads(1), OPENBLAS_NUM_THREADS=${n}`, threads: 1, blas: n },
  ];
  const times = settings.map(() => [] as number[]);
  let note = '';
  for (let round = 0; round < 2; round++) {
    settings.forEach((s, i) => {
      const r = torchSteps(config, bc, s.threads, s.blas, steps);
      times[i].push(...r.times);
      note ||= r.note;
    });
  }
  const medians = times.map((t) => (t.length ? median(t) : null));
  let best = -1;
  for (let i = 1; i < settings.length; i++) if (medians[i] !== null && (best < 0 || medians[i]! < medians[best]!)) best = i;
  return { one: medians[0], many: best < 0 ? null : medians[best], setting: best < 0 ? '' : settings[best].label, note };
}

export interface EngineBenchOptions {
  skipCpu: boolean;
  skipStock: boolean;
  skipBrowser: boolean;
  steps: number;
  only: string | null;
  threads: number;
}

const load = (): number[] => loadavg().map((x) => Math.round(x * 100) / 100);

export async function runEngineBench(opts: EngineBenchOptions): Promise<EngineBenchResult> {
  await tf.setBackend('wasm');
  await tf.ready();
  registerKernelFixes();
  registerFastKernels();
  const backend = tf.backend() as unknown as WasmBackendLike;
  const N = await startKernelThreads(opts.threads, backend);
  if (N < 2) console.error(`engine bench: ${N} kernel thread(s) only (${availableParallelism()} cores)`);
  const peak = gemmPeak(1);
  const peakN = gemmPeak(N);
  const sharedUs = N > 1 ? sharedJobCost(N) : 0;
  // the browser first, while this process's helper threads sleep
  const browser = opts.skipBrowser
    ? { result: null, note: 'skipped (--skip-browser)' }
    : await runBrowserBench({ steps: opts.steps, only: opts.only });
  if (!browser.result) console.error(`browser rows: ${browser.note}`);
  const results: ConfigResult[] = [];
  for (const bc of CONFIGS) {
    if (opts.only && opts.only !== bc.name) continue;
    const loadBefore = load();
    const config = presetConfig(bc.preset, VOCAB);
    const tokens = bc.batch * bc.seqLen;
    heapPeak = 0;

    await tf.setBackend('wasm');
    registerFastKernels();
    const pool = kernelPoolFor(backend);
    if (pool) Object.assign(pool.stats, { jobs: 0, jobMs: 0, copyBytes: 0, copyMs: 0 });
    const [engine1, engineN] = timeSteps(config, bc, 2, opts.steps, [1, N], noteHeap);
    // shared jobs run only in the N-thread steps: the timed ones and one warm-up
    const perStep = (x: number) => x / (opts.steps + 1);
    const poolStats = pool
      ? {
          jobs: perStep(pool.stats.jobs),
          job_ms: perStep(pool.stats.jobMs),
          copy_mb: perStep(pool.stats.copyBytes) / 2 ** 20,
          copy_ms: perStep(pool.stats.copyMs),
        }
      : null;
    setKernelThreads(N);
    const fwd = forward384(config);
    const engineHeap = heapPeak;

    let stockMs: number | null = null;
    if (!opts.skipStock) {
      restoreStockKernels();
      setKernelThreads(1);
      stockMs = timeSteps(config, bc, 1, 1, [1], noteHeap)[0];
      registerFastKernels();
    }

    let cpuMs: number | null = null;
    if (!opts.skipCpu) {
      await tf.setBackend('cpu');
      cpuMs = timeSteps(config, bc, 0, 1, [1])[0];
      await tf.setBackend('wasm');
    }
    setKernelThreads(N);

    const torch = torchRows(config, bc, N, opts.steps);
    if (torch.note) console.error(`${bc.name}: torch rows incomplete: ${torch.note}`);
    const flops = stepFlops(config, bc.batch, bc.seqLen);
    const inBrowser = browser.result?.configs.find((c) => c.name === bc.name);
    const stepMs: Record<Row, number | null> = {
      engine_1: engine1,
      engine_N: engineN,
      browser_1: inBrowser?.stepMs1 ?? null,
      browser_N: inBrowser?.stepMsN ?? null,
      stock_wasm: stockMs,
      cpu: cpuMs,
      torch_1: torch.one,
      torch_N: torch.many,
    };
    const perS = (ms: number | null) => (ms === null ? null : tokens / (ms / 1000));
    const tokensPerS = Object.fromEntries(ROWS.map((r) => [r, perS(stepMs[r])])) as Record<Row, number | null>;
    const torchSpeedup = torch.one !== null && torch.many !== null ? torch.one / torch.many : null;
    results.push({
      name: bc.name,
      tokens_per_s: tokensPerS,
      step_ms: stepMs,
      engine_speedup: engine1 / engineN,
      engine_efficiency: engine1 / engineN / N,
      browser_speedup: inBrowser ? inBrowser.stepMs1 / inBrowser.stepMsN : null,
      torch_speedup: torchSpeedup,
      torch_efficiency: torchSpeedup === null ? null : torchSpeedup / N,
      torch_n_setting: torch.setting,
      peak_fraction: flops / (engine1 / 1000) / 1e9 / peak,
      heap_peak_bytes: engineHeap,
      pool_bytes: kernelPoolFor(backend)?.memory.buffer.byteLength ?? 0,
      pool_per_step: poolStats,
      forward_ms_384: fwd,
      model_gflop_per_step: flops / 1e9,
      load_before: loadBefore,
      load_after: load(),
    });
  }
  return {
    threads: N,
    relaxed_simd: fastModuleFor(backend).build.relaxed,
    browser: browser.result,
    gemm_peak_gflops: peak,
    gemm_peak_gflops_n: peakN,
    shared_job_us: sharedUs,
    configs: results,
  };
}

function fmt(x: number | null, digits = 0): string {
  return x === null ? '—' : x.toFixed(digits);
}

function ratio(a: number | null, b: number | null): string {
  return a === null || b === null ? '—' : (a / b).toFixed(2);
}

export function printEngineTable(r: EngineBenchResult): void {
  const N = r.threads;
  console.log(
    `engine: ${N} kernel threads (${availableParallelism()} cores), ${r.relaxed_simd ? 'relaxed-SIMD' : 'SIMD128'} build; ` +
      `plain 2-D GEMM 512³: ${r.gemm_peak_gflops.toFixed(1)} GFLOP/s on 1 thread (best of fast kernel and stock XNNPACK), ` +
      `${r.gemm_peak_gflops_n.toFixed(1)} on ${N}; one shared job costs ${r.shared_job_us.toFixed(0)} µs more than one on this thread`,
  );
  const b = r.browser;
  if (b) {
    console.log(
      `browser: ${b.userAgent.match(/(Headless)?Chrome\/[\d.]+/)?.[0] ?? b.userAgent}, ${b.threads} kernel threads ${b.inPlace ? 'in place on the shared tfjs heap' : 'over copies'}, ` +
        `${b.relaxedSimd ? 'relaxed-SIMD' : 'SIMD128'} build; GEMM 512³: ${b.gemmGflops1.toFixed(1)} GFLOP/s on 1 thread, ${b.gemmGflopsN.toFixed(1)} on ${b.threads}`,
    );
  }
  const label: Record<Row, string> = {
    engine_1: 'engine 1',
    engine_N: `engine ${N}`,
    browser_1: 'browser 1',
    browser_N: `browser ${b?.threads ?? N}`,
    stock_wasm: 'stock wasm',
    cpu: 'tfjs cpu',
    torch_1: 'torch 1',
    torch_N: `torch ${N}`,
  };
  console.log('config              row           step ms    tokens/s');
  for (const c of r.configs) {
    console.log(`${c.name}: load average ${c.load_before.join(' ')} before, ${c.load_after.join(' ')} after (1, 5, 15 min)`);
    for (const row of ROWS) {
      console.log(`${c.name.padEnd(20)}${label[row].padEnd(14)}${fmt(c.step_ms[row]).padStart(8)}${fmt(c.tokens_per_s[row]).padStart(12)}`);
    }
    const t = c.tokens_per_s;
    console.log(
      `${c.name.padEnd(20)}engine ${N}/1 ${c.engine_speedup.toFixed(2)}× (efficiency ${c.engine_efficiency.toFixed(2)})  ` +
        `torch ${N}/1 ${fmt(c.torch_speedup, 2)}× (efficiency ${fmt(c.torch_efficiency, 2)}; torch ${N} = ${c.torch_n_setting || '—'})`,
    );
    const goals = (who: 'engine' | 'browser', speedup: number | null): string => {
      const vs = t[`${who}_N`] !== null && t.torch_N !== null ? t[`${who}_N`]! / t.torch_N : null;
      return (
        `goal ${who} ${N}/torch ${N} ≥ ${GOAL_VS_TORCH}: ${vs === null ? '—' : vs >= GOAL_VS_TORCH ? 'met' : 'NOT met'}` +
        (N === 2 ? `; ${who} 2/1 ≥ ${GOAL_SCALING_2}: ${speedup === null ? '—' : speedup >= GOAL_SCALING_2 ? 'met' : 'NOT met'}` : '')
      );
    };
    console.log(
      `${c.name.padEnd(20)}engine ${N}/torch ${N} ${ratio(t.engine_N, t.torch_N)}  engine 1/torch 1 ${ratio(t.engine_1, t.torch_1)}  ` +
        `engine 1/stock ${ratio(t.engine_1, t.stock_wasm)}×  engine ${N}/stock ${ratio(t.engine_N, t.stock_wasm)}×  engine 1/cpu ${ratio(t.engine_1, t.cpu)}×  (${goals('engine', c.engine_speedup)})`,
    );
    console.log(
      `${c.name.padEnd(20)}browser ${N}/1 ${fmt(c.browser_speedup, 2)}×  browser ${N}/torch ${N} ${ratio(t.browser_N, t.torch_N)}  ` +
        `browser 1/torch 1 ${ratio(t.browser_1, t.torch_1)}  (${goals('browser', c.browser_speedup)})`,
    );
    const ps = c.pool_per_step;
    if (ps) {
      console.log(
        `${c.name.padEnd(20)}per engine ${N}-thread step: ${ps.jobs.toFixed(0)} shared jobs taking ${ps.job_ms.toFixed(0)} ms; ` +
          `${ps.copy_mb.toFixed(0)} MB copied into and out of the kernel pool's memory in ${ps.copy_ms.toFixed(1)} ms`,
      );
    }
    console.log(
      `${c.name.padEnd(20)}peak fraction ${fmt(c.peak_fraction, 2)} on 1 thread (${c.model_gflop_per_step.toFixed(1)} GFLOP/step)  ` +
        `heap peak ${(c.heap_peak_bytes / 2 ** 20).toFixed(0)} MiB (+ ${(c.pool_bytes / 2 ** 20).toFixed(0)} MiB kernel pool)  forward 384 tokens ${fmt(c.forward_ms_384, 1)} ms on ${N} threads`,
    );
  }
}

export function engineJson(r: EngineBenchResult): string {
  return JSON.stringify({
    threads: r.threads,
    relaxed_simd: r.relaxed_simd,
    browser: r.browser && { ...r.browser, configs: undefined },
    gemm_peak_gflops: r.gemm_peak_gflops,
    gemm_peak_gflops_n: r.gemm_peak_gflops_n,
    shared_job_us: r.shared_job_us,
    configs: r.configs.map((c) => ({
      name: c.name,
      tokens_per_s: c.tokens_per_s,
      engine_speedup: c.engine_speedup,
      engine_efficiency: c.engine_efficiency,
      browser_speedup: c.browser_speedup,
      torch_speedup: c.torch_speedup,
      torch_n_setting: c.torch_n_setting,
      peak_fraction: c.peak_fraction,
      heap_peak_bytes: c.heap_peak_bytes,
      pool_bytes: c.pool_bytes,
      pool_per_step: c.pool_per_step,
      forward_ms_384: c.forward_ms_384,
      load_before: c.load_before,
      load_after: c.load_after,
    })),
  });
}

function parseArgs(argv: string[]): EngineBenchOptions & { json: boolean } {
  const stepsAt = argv.indexOf('--steps');
  const configAt = argv.indexOf('--config');
  const threadsAt = argv.indexOf('--threads');
  return {
    json: argv.includes('--json'),
    skipCpu: argv.includes('--skip-cpu'),
    skipStock: argv.includes('--skip-stock'),
    skipBrowser: argv.includes('--skip-browser'),
    steps: stepsAt >= 0 ? Number(argv[stepsAt + 1]) : 5,
    only: configAt >= 0 ? argv[configAt + 1] : null,
    threads: threadsAt >= 0 ? Number(argv[threadsAt + 1]) : availableParallelism(),
  };
}

export async function main(argv: string[]): Promise<void> {
  const opts = parseArgs(argv);
  const result = await runEngineBench(opts);
  printEngineTable(result);
  if (opts.json) console.log(engineJson(result));
  if (kernelPoolFor(tf.backend() as unknown as WasmBackendLike)) console.error(`(kernel threads at the end: ${kernelThreadCount()})`);
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  await main(process.argv.slice(2));
}
