// `predict` writes its files as every CLI output is written (src/node/write-files.ts): a
// write that fails names the file and the reason, exits 1 without "internal error", keeps
// an earlier predictions file whole, and leaves no temporary file. The failures here are
// real ones (a missing folder); the full-disk case is tests/cli/full-disk.test.ts.
import { execFile } from 'node:child_process';
import { mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, describe, expect, it } from 'vitest';

const run = promisify(execFile);
const root = join(import.meta.dirname, '../..');
const MODEL = 'tests/reference/fixtures/checkpoint';
const DATA = 'examples/mini.jsonl';
const dir = mkdtempSync(join(tmpdir(), 'spanwright-predict-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function predict(...args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  const argv = ['tsx', 'src/cli/main.ts', 'predict', '--model', MODEL, '--data', DATA, '--max-len', '32', '--stride', '8', ...args];
  try {
    const { stdout, stderr } = await run('npx', argv, { cwd: root });
    return { code: 0, stdout, stderr };
  } catch (err) {
    const e = err as { code: number; stdout: string; stderr: string };
    return { code: e.code, stdout: e.stdout, stderr: e.stderr };
  }
}

describe('predict --out and --na-prob', () => {
  it('a file it cannot write is named, with the reason; the earlier predictions stay whole; no temporary file', async () => {
    const missing = await predict('--out', join(dir, 'no-such-folder', 'pred.json'));
    expect(missing.code).toBe(1);
    expect(missing.stderr).toMatch(
      /cannot write .*no-such-folder\/pred\.json \([\d.]+ (bytes|KiB)\): its folder does not exist \(ENOENT\)/,
    );
    expect(missing.stderr).not.toContain('internal error');

    const pred = join(dir, 'pred.json');
    writeFileSync(pred, 'earlier predictions');
    const half = await predict('--out', pred, '--na-prob', join(dir, 'no-such-folder', 'na.json'));
    expect(half.code).toBe(1);
    expect(half.stderr).toMatch(/cannot write .*no-such-folder\/na\.json/);
    expect(readFileSync(pred, 'utf8')).toBe('earlier predictions');
    expect(readdirSync(dir).filter((n) => n.includes('.tmp-'))).toEqual([]);

    const both = await predict('--out', pred, '--na-prob', join(dir, 'na.json'));
    expect(both.code, both.stderr).toBe(0);
    expect(Object.keys(JSON.parse(readFileSync(pred, 'utf8')) as object)).toHaveLength(10);
    expect(Object.keys(JSON.parse(readFileSync(join(dir, 'na.json'), 'utf8')) as object)).toHaveLength(10);
  }, 60_000);
});
