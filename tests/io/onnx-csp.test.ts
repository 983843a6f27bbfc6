// The ONNX export compiles no code at run time, so it works under the workbench's
// Content-Security-Policy (`script-src 'self' 'wasm-unsafe-eval' blob:`: no
// 'unsafe-eval', which per the CSP Level 3 specification blocks eval() and the Function
// constructor). Two checks:
//   1. in this process, the global Function constructor and eval replaced by throwing
//      stand-ins while exportOnnx runs (protobufjs reflection builds its encoders with
//      `Function.apply(null, …)`, the path this catches);
//   2. in a child Node process started with V8's --disallow-code-generation-from-strings,
//      which refuses every string-to-code path (eval, new Function, and the constructor
//      reached through any function's `.constructor`) as the browser's CSP does, the
//      export's bytes equal those made here.
// Each export is the first in its process (this file runs in its own module graph), so
// no encoder compiled earlier could hide a code generation.
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { exportOnnx } from '../../src/io/onnx.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import type { NamedTensors } from '../../src/io/tensors.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));

function smallModel(): { config: ReaderConfig; named: NamedTensors } {
  const config = presetConfig('tiny', 64, { hiddenSize: 32, numHeads: 4, intermediateSize: 64, numLayers: 2, maxPositions: 24 });
  const params = ReaderParams.init(config, 5);
  const named = params.toNamed();
  params.dispose();
  return { config, named };
}

/** Runs `body` with the Function constructor and eval replaced by throwing stand-ins. */
function withoutCodeGeneration<T>(body: () => T): T {
  const g = globalThis as { Function: FunctionConstructor; eval: typeof eval };
  const original = { Function: g.Function, eval: g.eval };
  const refuse = (what: string) => {
    throw new EvalError(`code generation from strings refused: ${what}`);
  };
  g.Function = new Proxy(original.Function, {
    apply: () => refuse('Function(…)'),
    construct: () => refuse('new Function(…)'),
  });
  g.eval = () => refuse('eval(…)');
  try {
    return body();
  } finally {
    g.Function = original.Function;
    g.eval = original.eval;
  }
}

describe('ONNX export without run-time code generation', () => {
  it('exports fp32 and int8 with the Function constructor and eval refused', () => {
    const { config, named } = smallModel();
    const { fp32, int8, probes } = withoutCodeGeneration(() => {
      // the stand-ins do refuse the paths a code generator takes (so this test can fail)
      const probes: string[] = [];
      for (const probe of [() => new Function('return 1'), () => Function.apply(null, ['return 1']), () => globalThis.eval('1')]) {
        try {
          probe();
        } catch (err) {
          if (err instanceof EvalError) probes.push('refused');
        }
      }
      return { fp32: exportOnnx(config, named), int8: exportOnnx(config, named, { int8: true }), probes };
    });
    expect(probes).toEqual(['refused', 'refused', 'refused']);
    expect(fp32.length).toBeGreaterThan(4 * 10_000); // ≈ 26k float weights
    expect(int8.length).toBeGreaterThan(10_000);
    expect(int8.length).toBeLessThan(fp32.length);
  });

  it('exports the same bytes in a Node process that refuses code generation from strings', () => {
    const { config, named } = smallModel();
    const dir = mkdtempSync(join(tmpdir(), 'spanwright-onnx-csp-'));
    try {
      writeFileSync(join(dir, 'model.safetensors'), namedToSafetensors(named));
      writeFileSync(join(dir, 'config.json'), JSON.stringify(config));
      const child = [
        `import { readFileSync, writeFileSync } from 'node:fs';`,
        `import { exportOnnx } from './src/io/onnx.js';`,
        `import { readSafetensors } from './src/io/safetensors.js';`,
        // the flag is in force: a code generator would fail here too
        `try { new Function('return 1'); process.exit(3); } catch (err) { if (!(err instanceof EvalError)) process.exit(4); }`,
        `const dir = ${JSON.stringify(dir)};`,
        `const config = JSON.parse(readFileSync(dir + '/config.json', 'utf8'));`,
        `const named = readSafetensors(new Uint8Array(readFileSync(dir + '/model.safetensors'))).tensors;`,
        `writeFileSync(dir + '/model.onnx', exportOnnx(config, named));`,
        `writeFileSync(dir + '/model.int8.onnx', exportOnnx(config, named, { int8: true }));`,
      ].join('\n');
      const run = spawnSync(
        process.execPath,
        ['--disallow-code-generation-from-strings', '--import', 'tsx', '--input-type=module', '-e', child],
        {
          cwd: ROOT,
          encoding: 'utf8',
          timeout: 60_000,
        },
      );
      expect(run.stderr).toBe('');
      expect(run.status).toBe(0);
      const here = { fp32: exportOnnx(config, named), int8: exportOnnx(config, named, { int8: true }) };
      expect(Buffer.compare(readFileSync(join(dir, 'model.onnx')), here.fp32)).toBe(0);
      expect(Buffer.compare(readFileSync(join(dir, 'model.int8.onnx')), here.int8)).toBe(0);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
