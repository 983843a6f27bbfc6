// The `inspect` and `export` commands end to end, through `npm run spanwright`'s entry
// (tsx src/cli/main.ts), on the checkpoint directory PyTorch's generator wrote
// (tests/reference/generate_fixtures.py) when present, else on one made here.
import { execFile } from 'node:child_process';
import { existsSync } from 'node:fs';
import { mkdtemp, readdir, readFile, rm, truncate, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readSafetensorsHeader, writeSafetensors } from '../../src/io/safetensors.js';

const run = promisify(execFile);
const ROOT = join(import.meta.dirname, '..', '..');
const CHECKPOINT = join(ROOT, 'tests', 'reference', 'fixtures', 'checkpoint');

async function cli(...args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  try {
    const { stdout, stderr } = await run(
      process.execPath,
      [join(ROOT, 'node_modules', 'tsx', 'dist', 'cli.mjs'), join(ROOT, 'src', 'cli', 'main.ts'), ...args],
      { cwd: ROOT },
    );
    return { code: 0, stdout, stderr };
  } catch (err) {
    const e = err as { code: number; stdout: string; stderr: string };
    return { code: e.code, stdout: e.stdout, stderr: e.stderr };
  }
}

/** A shell pipeline's output (bash with pipefail off: the last command's status). */
async function runShell(command: string): Promise<{ stdout: string; stderr: string }> {
  const { exec } = await import('node:child_process');
  return new Promise((resolve) => exec(command, { cwd: ROOT, maxBuffer: 64 << 20 }, (_err, stdout, stderr) => resolve({ stdout, stderr })));
}

let work = '';
beforeAll(async () => {
  work = await mkdtemp(join(tmpdir(), 'spanwright-cli-io-'));
});
afterAll(async () => {
  await rm(work, { recursive: true, force: true });
});

describe('spanwright inspect', () => {
  it('lists a file larger than one read can take (2 GiB), from its header alone', async () => {
    // a sparse file: a header for one F32 tensor of 640 M values (2.56 GB), the data all zeros on no disk blocks
    const huge = join(work, 'huge.safetensors');
    const values = 640_000_000;
    const header = new TextEncoder().encode(
      JSON.stringify({ w: { dtype: 'F32', shape: [values], data_offsets: [0, values * 4] } }).padEnd(64, ' '),
    );
    const head = new Uint8Array(8 + header.length);
    new DataView(head.buffer).setBigUint64(0, BigInt(header.length), true);
    head.set(header, 8);
    await writeFile(huge, head);
    await truncate(huge, 8 + header.length + values * 4);
    const r = await cli('inspect', huge, '--json');
    expect(r.stderr).toBe('');
    expect(JSON.parse(r.stdout.trim().split('\n').pop()!)).toMatchObject({
      bytes: 8 + header.length + values * 4,
      tensorCount: 1,
      parameterCount: values,
    });
    await rm(huge);
  });

  it('lists a header of 300 000 tensors (more than a spread call takes) and survives a closed pipe', async () => {
    const many = join(work, 'many.safetensors');
    const entries = Array.from(
      { length: 300_000 },
      (_, i) =>
        [`t${i}`, { dtype: 'F32', shape: [0], data: new Float32Array(0) }] as [
          string,
          { dtype: 'F32'; shape: number[]; data: Float32Array },
        ],
    );
    await writeFile(many, writeSafetensors(entries));
    const spanwright = `"${process.execPath}" "${join(ROOT, 'node_modules', 'tsx', 'dist', 'cli.mjs')}" "${join(ROOT, 'src', 'cli', 'main.ts')}"`;
    const r = await runShell(`${spanwright} inspect "${many}" --json`);
    expect((JSON.parse(r.stdout.trim().split('\n').pop()!) as { tensorCount: number }).tensorCount).toBe(300_000);
    // `inspect … | head -1`: the reader closes the pipe early; no stack trace, no error exit
    const piped = await runShell(`${spanwright} inspect "${many}" | head -1`);
    expect(piped.stderr).not.toMatch(/EPIPE|at [\w.]+ \(/);
    expect(piped.stdout.split('\n').length).toBeLessThanOrEqual(2);
  }, 120_000);

  it('lists tensors and metadata as JSON, and names the fault of a bad file', async () => {
    const good = join(work, 'small.safetensors');
    await writeFile(
      good,
      writeSafetensors(
        [
          ['a.weight', { dtype: 'F16', shape: [2, 3], data: new Float32Array(6) }],
          ['a.weight.scale', { dtype: 'F32', shape: [2], data: new Float32Array(2) }],
        ],
        { note: 'hello' },
      ),
    );
    const ok = await cli('inspect', good, '--json');
    expect(ok.code).toBe(0);
    const listing = JSON.parse(ok.stdout.trim().split('\n').pop()!) as {
      tensorCount: number;
      parameterCount: number;
      metadata: object;
      tensors: Array<{ name: string; dtype: string; shape: number[]; bytes: number }>;
    };
    expect(listing.tensorCount).toBe(2);
    expect(listing.parameterCount).toBe(8);
    expect(listing.metadata).toEqual({ note: 'hello' });
    expect(listing.tensors.map((t) => [t.name, t.dtype, t.shape, t.bytes])).toEqual([
      ['a.weight', 'F16', [2, 3], 12],
      ['a.weight.scale', 'F32', [2], 8],
    ]);

    const bad = join(work, 'bad.safetensors');
    const bytes = new Uint8Array(await readFile(good));
    await writeFile(bad, bytes.subarray(0, bytes.length - 4)); // cut short
    const failed = await cli('inspect', bad);
    expect(failed.code).toBe(1);
    expect(failed.stderr).toMatch(
      /spanwright: .*bad\.safetensors: tensor "a\.weight\.scale", field data_offsets: end 20 is past the data section's 16 bytes/,
    );
  });
});

describe('spanwright export', () => {
  it('exports the PyTorch-written checkpoint with fp16, int8 and ONNX', async () => {
    // a committed fixture (tests/reference/generate_fixtures.py): missing, it fails here
    expect(existsSync(join(CHECKPOINT, 'model.safetensors')), CHECKPOINT).toBe(true);
    const out = join(work, 'exported');
    const res = await cli('export', '--model', CHECKPOINT, '--out', out, '--fp16', '--int8', '--onnx', '--json');
    expect(res.stderr).not.toMatch(/internal error/);
    expect(res.code).toBe(0);
    const report = JSON.parse(res.stdout.trim().split('\n').pop()!) as {
      files: Array<{ name: string }>;
      int8: { maxAbsError: number; drift: { maxAbsLogitDiff: number } };
      notices: string[];
    };
    expect((await readdir(out)).sort()).toEqual(
      ['MODEL_CARD.md', 'config.json', 'model.int8.onnx', 'model.int8.safetensors', 'model.onnx', 'model.safetensors', 'vocab.txt'].sort(),
    );
    expect(report.int8.maxAbsError).toBeGreaterThan(0);
    expect(report.int8.drift.maxAbsLogitDiff).toBeGreaterThan(0);
    expect(report.notices.join(' ')).toMatch(/no MLM head/); // the fixture carries no cls.* tensors
    const header = readSafetensorsHeader(new Uint8Array(await readFile(join(out, 'model.safetensors'))));
    expect(new Set(header.entries.map((e) => e.dtype))).toEqual(new Set(['F16']));
    // refuses to overwrite without --force
    const again = await cli('export', '--model', CHECKPOINT, '--out', out);
    expect(again.code).toBe(1);
    expect(again.stderr).toMatch(/already holds config\.json.*pass --force/);
  });
});
