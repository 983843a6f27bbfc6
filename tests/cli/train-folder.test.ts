// `train` and its output folder, as the user runs it (issue 15, items 3 and 7): a folder
// another living run holds is refused before anything is written; a lock left by a killed
// run is taken over with a note; what a killed checkpoint save left (a temporary blob, a
// blob without its summary) is swept when the run takes the folder. Unit tests of the
// lock and the sweep: tests/cli/out-lock.test.ts, tests/node/write-files.test.ts.
import { execFile, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, describe, expect, it } from 'vitest';
import { LOCK_FILE } from '../../src/cli/out-lock.js';

const run = promisify(execFile);
const root = join(import.meta.dirname, '../..');
const dir = mkdtempSync(join(tmpdir(), 'spanwright-train-folder-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function train(out: string): Promise<{ code: number; stdout: string; stderr: string }> {
  const argv = [
    'tsx',
    'src/cli/main.ts',
    '--threads',
    '1',
    'train',
    '--train',
    'examples/mini.jsonl',
    '--base',
    'tests/reference/fixtures/checkpoint',
  ];
  try {
    const { stdout, stderr } = await run('npx', [...argv, '--out', out, '--max-len', '32', '--stride', '8', '--epochs', '1'], {
      cwd: root,
    });
    return { code: 0, stdout, stderr };
  } catch (err) {
    const e = err as { code: number; stdout: string; stderr: string };
    return { code: e.code, stdout: e.stdout, stderr: e.stderr };
  }
}

describe('train --out', () => {
  it('takes over a killed run’s lock and sweeps what its killed save left', async () => {
    const out = join(dir, 'killed');
    const checkpoints = join(out, 'checkpoints');
    mkdirSync(checkpoints, { recursive: true });
    // the lock of a process that has ended: a child that has exited
    const gone = Number(spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' }).stdout);
    writeFileSync(join(out, LOCK_FILE), JSON.stringify({ pid: gone, host: hostname(), what: 'training', since: '2026-01-01T00:00:00Z' }));
    writeFileSync(join(checkpoints, '.step-00000004-aaaaaaaa.safetensors.tmp-0123456789ab'), 'half a blob');
    writeFileSync(join(checkpoints, 'step-00000099-bbbbbbbb.safetensors'), 'a whole blob whose summary was never written');
    const r = await train(out);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stderr).toContain(`note: ${out} held a lock of process ${gone}, which no longer runs; taken over`);
    expect(r.stderr).toContain(`note: removed 2 file(s) an interrupted checkpoint save left in ${checkpoints}`);
    const left = readdirSync(checkpoints);
    expect(left.filter((n) => n.includes('.tmp-') || n.startsWith('step-00000099-'))).toEqual([]);
    expect(left.filter((n) => n.endsWith('.json'))).toHaveLength(1); // this run's own end checkpoint
    expect(existsSync(join(out, LOCK_FILE))).toBe(false); // released at the end
    expect(existsSync(join(out, 'model.safetensors'))).toBe(true);
  }, 120_000);

  it('refuses a folder a living run holds, naming it, and touches nothing in it', async () => {
    const out = join(dir, 'busy');
    mkdirSync(join(out, 'checkpoints'), { recursive: true });
    writeFileSync(join(out, 'checkpoints', 'step-00000002-cccccccc.safetensors'), 'the other run’s save in flight');
    // this test's own process stands for the other run
    writeFileSync(
      join(out, LOCK_FILE),
      JSON.stringify({ pid: process.pid, host: hostname(), what: 'training', since: '2026-01-01T00:00:00Z' }),
    );
    const r = await train(out);
    expect(r.code).toBe(1);
    expect(r.stderr).toContain(
      `spanwright: ${out} is in use: another training (process ${process.pid}, since 2026-01-01T00:00:00Z) writes there.`,
    );
    expect(readdirSync(join(out, 'checkpoints'))).toEqual(['step-00000002-cccccccc.safetensors']);
    expect(readdirSync(out).sort()).toEqual([LOCK_FILE, 'checkpoints'].sort());
  }, 120_000);
});
