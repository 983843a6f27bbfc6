// One training run per output folder (src/cli/out-lock.ts): a second run is refused with a
// clear message while the first lives; a lock left by a process that is gone is taken over.
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { LOCK_FILE, lockOutputFolder } from '../../src/cli/out-lock.js';

const dir = mkdtempSync(join(tmpdir(), 'spanwright-lock-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('the output-folder lock', () => {
  it('refuses a second run while the first holds the folder, and frees it on release', async () => {
    const first = await lockOutputFolder(join(dir, 'a'));
    expect(JSON.parse(readFileSync(join(dir, 'a', LOCK_FILE), 'utf8'))).toMatchObject({ pid: process.pid, what: 'training' });
    await expect(lockOutputFolder(join(dir, 'a'))).rejects.toThrow(
      new RegExp(`is in use: another training \\(process ${process.pid}, since .*Give this run its own --out`),
    );
    await first.release();
    expect(existsSync(join(dir, 'a', LOCK_FILE))).toBe(false);
    const again = await lockOutputFolder(join(dir, 'a'));
    expect(again.tookOverFrom).toBeNull();
    await again.release();
  });

  it('takes over a lock whose process has ended', async () => {
    // a real process id that no longer runs: a child that has exited
    const gone = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' });
    const pid = Number(gone.stdout);
    writeFileSync(join(dir, LOCK_FILE), JSON.stringify({ pid, host: hostname(), what: 'training', since: '2026-01-01T00:00:00Z' }));
    const lock = await lockOutputFolder(dir);
    expect(lock.tookOverFrom).toBe(pid);
    expect(JSON.parse(readFileSync(join(dir, LOCK_FILE), 'utf8')).pid).toBe(process.pid);
    await lock.release();
    // a half-written lock file is stale too
    writeFileSync(join(dir, LOCK_FILE), '{"pid": 12');
    const other = await lockOutputFolder(dir);
    expect(other.tookOverFrom).toBe(-1);
    await other.release();
  });
});
