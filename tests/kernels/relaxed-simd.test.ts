// Relaxed SIMD (src/kernels/wasm-module.ts; build.sh's -mrelaxed-simd builds): the
// probe that decides whether to load the relaxed build agrees with the real relaxed
// binaries, and the relaxed kernels (f32x4.relaxed_madd in the GEMM: fused where the
// hardware has FMA) give the SIMD128 kernels' results within rounding.
//
// Node 20's V8 validates relaxed SIMD only behind --experimental-wasm-relaxed-simd, so
// the kernels are compared in a child Node started with that flag
// (relaxed-simd.child.ts); Chromium runs the relaxed build in the browser tests.
//
// Tolerance: |relaxed − simd128| ≤ K·2⁻²⁴·max|simd128| per output — a fused multiply-add
// skips one rounding of the product, at most half an ulp of the running sum, for each
// of the K terms of a dot product (common practice bound). Attention's products have
// K = T or D. The relaxed build on two threads must give its own one-thread bits.

import { spawnSync } from 'node:child_process';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { KERNELS_RELAXED_WASM_BASE64, KERNELS_SHARED_RELAXED_WASM_BASE64 } from '../../src/kernels/wasm-binary.js';
import { RELAXED_SIMD_PROBE, relaxedSimdSupported } from '../../src/kernels/wasm-module.js';

interface Diff {
  max: number;
  scale: number;
  differing: number;
  length: number;
}

interface ChildReport {
  supported: boolean;
  builds: { plain: boolean; relaxed: boolean };
  K: number;
  relaxedVsPlain: Record<string, Diff>;
  twoThreadsVsOne: Record<string, Diff>;
}

const root = join(import.meta.dirname, '..', '..');

function childReport(): ChildReport {
  // a runtime that validates relaxed SIMD already (a newer Node) needs no flag
  const flag = relaxedSimdSupported() ? [] : ['--experimental-wasm-relaxed-simd'];
  const run = spawnSync(process.execPath, [...flag, '--import', 'tsx', join(import.meta.dirname, 'relaxed-simd.child.ts')], {
    cwd: root,
    encoding: 'utf8',
    timeout: 120_000,
  });
  const line = run.stdout.trim().split('\n').pop() ?? '';
  if (run.status !== 0 || !line.startsWith('{')) throw new Error(`relaxed-simd.child.ts failed (${run.status}): ${run.stderr}`);
  return JSON.parse(line) as ChildReport;
}

describe('relaxed SIMD', () => {
  it('the probe agrees with the real relaxed builds in this runtime', () => {
    const real = [KERNELS_RELAXED_WASM_BASE64, KERNELS_SHARED_RELAXED_WASM_BASE64].map((b) =>
      WebAssembly.validate(Buffer.from(b, 'base64')),
    );
    expect(real[0]).toBe(real[1]);
    expect(relaxedSimdSupported()).toBe(real[0]);
    expect(WebAssembly.validate(RELAXED_SIMD_PROBE)).toBe(real[0]);
  });

  it('gives the SIMD128 results within rounding, and its own bits on two threads', () => {
    const report = childReport();
    expect(report.supported).toBe(true); // with the flag, the probe says yes
    expect(report.builds).toEqual({ plain: false, relaxed: true }); // and each heap ran the build asked for
    const T = 29;
    const D = 8;
    const depth: Record<string, number> = { gemm: report.K, gemmAtA: 130, context: T, dq: T, dk: T, dv: T };
    for (const [key, d] of Object.entries(report.relaxedVsPlain)) {
      const bound = Math.max(depth[key], D) * 2 ** -24 * d.scale;
      expect(d.max, `${key}: ${d.differing} of ${d.length} differ, by up to ${d.max}`).toBeLessThanOrEqual(bound);
    }
    for (const [key, d] of Object.entries(report.twoThreadsVsOne)) expect(d.differing, key).toBe(0);
  });
});
