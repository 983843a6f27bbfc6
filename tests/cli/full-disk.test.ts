// The CLI's writes on a full disk (issue 15, item 4): the message names the file, its size
// and the reason in words; nothing the user had is replaced by part of a new set of files;
// no temporary file stays behind. A full disk is made here by fault injection, not by a
// real one: `open` from node:fs/promises hands out real file handles whose writes fail
// with ENOSPC once they would take more than `disk.room` bytes — what a nearly full disk
// does (the file is created, its bytes are not written). The same cases were also run by
// hand on a 2 MiB tmpfs (the closing note of the issue gives the commands).
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeEach, describe, expect, it, vi } from 'vitest';

const disk = vi.hoisted(() => ({ room: Number.POSITIVE_INFINITY }));

vi.mock('node:fs/promises', async (importOriginal) => {
  const real = await importOriginal<typeof import('node:fs/promises')>();
  const enospc = () => Object.assign(new Error('ENOSPC: no space left on device, write'), { code: 'ENOSPC', errno: -28, syscall: 'write' });
  const open: typeof real.open = async (...args) => {
    const handle = await real.open(...args);
    return new Proxy(handle, {
      get(target, prop) {
        if (prop === 'writeFile') {
          return async (data: string | Uint8Array) => {
            const bytes = typeof data === 'string' ? Buffer.byteLength(data) : data.length;
            if (bytes > disk.room) throw enospc();
            return target.writeFile(data);
          };
        }
        const value: unknown = Reflect.get(target, prop, target);
        return typeof value === 'function' ? (value as (...a: unknown[]) => unknown).bind(target) : value;
      },
    });
  };
  return { ...real, open, default: { ...real, open } };
});

const { writeFileAtomically, writeFilesAtomically, writePathsAtomically } = await import('../../src/node/write-files.js');
const { lockOutputFolder, LOCK_FILE } = await import('../../src/cli/out-lock.js');
const { FsCheckpointStore } = await import('../../src/node/fs-store.js');
const { sampleCheckpoint } = await import('../io/checkpoint-store-suite.js');

const dir = mkdtempSync(join(tmpdir(), 'spanwright-full-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
beforeEach(() => {
  disk.room = Number.POSITIVE_INFINITY;
});

const temporaries = (folder: string) => readdirSync(folder).filter((n) => n.includes('.tmp-'));
const FULL = /the disk is full \(ENOSPC; [\d.]+ (MiB|KiB|bytes) free\)$/;

describe('on a full disk', () => {
  it('an export over an older one replaces none of its files: no new config.json beside the old weights', async () => {
    const out = join(dir, 'export');
    await writeFilesAtomically(out, [
      { name: 'config.json', bytes: 'old config' },
      { name: 'model.safetensors', bytes: new Uint8Array(64).fill(1) },
    ]);
    disk.room = 1000; // the new config.json fits, the new weights do not
    await expect(
      writeFilesAtomically(out, [
        { name: 'config.json', bytes: 'new config' },
        { name: 'model.safetensors', bytes: new Uint8Array(3 * 1024 * 1024) },
      ]),
    ).rejects.toThrow(new RegExp(`^cannot write ${out}/model\\.safetensors \\(3\\.0 MiB\\): ${FULL.source}`));
    expect(readFileSync(join(out, 'config.json'), 'utf8')).toBe('old config');
    expect(readFileSync(join(out, 'model.safetensors'))).toEqual(Buffer.alloc(64, 1));
    expect(temporaries(out)).toEqual([]);
  });

  it('predictions and their score differences (two folders) are written both or neither', async () => {
    const a = join(dir, 'pred.json');
    const b = join(dir, 'na-prob.json');
    writeFileSync(a, 'earlier predictions');
    disk.room = 100;
    await expect(
      writePathsAtomically([
        { path: a, bytes: '{}' },
        { path: b, bytes: 'x'.repeat(5000) },
      ]),
    ).rejects.toThrow(new RegExp(`^cannot write ${b} \\(4\\.9 KiB\\): ${FULL.source}`));
    expect(readFileSync(a, 'utf8')).toBe('earlier predictions');
    expect(existsSync(b)).toBe(false);
    expect(temporaries(dir)).toEqual([]);
  });

  it('check --write-clean (one file) leaves its temporary file nowhere', async () => {
    disk.room = 0;
    const target = join(dir, 'clean.jsonl');
    await expect(writeFileAtomically(target, '{"id": "a"}\n')).rejects.toThrow(
      new RegExp(`^cannot write ${target} \\(12 bytes\\): ${FULL.source}`),
    );
    expect(existsSync(target)).toBe(false);
    expect(temporaries(dir)).toEqual([]);
  });

  it('a checkpoint that cannot be saved names its blob and leaves no blob, summary or temporary file', async () => {
    const folder = join(dir, 'checkpoints');
    const store = new FsCheckpointStore(folder);
    const kept = await store.save(sampleCheckpoint(3));
    disk.room = 0;
    await expect(store.save(sampleCheckpoint(6))).rejects.toThrow(
      /^cannot write .*checkpoints\/step-00000006-\w+\.safetensors \(\d+ bytes\): the disk is full/,
    );
    expect((await store.list()).map((s) => s.id)).toEqual([kept.id]);
    expect(readdirSync(folder).sort()).toEqual([`${kept.id}.json`, `${kept.id}.safetensors`]);
  });

  it('the output-folder lock says it cannot be written, and leaves no empty lock behind', async () => {
    const out = join(dir, 'run');
    disk.room = 0;
    await expect(lockOutputFolder(out)).rejects.toThrow(new RegExp(`^cannot write ${out}/\\${LOCK_FILE} \\(\\d+ bytes\\): ${FULL.source}`));
    expect(existsSync(join(out, LOCK_FILE))).toBe(false);
    disk.room = Number.POSITIVE_INFINITY;
    const lock = await lockOutputFolder(out);
    expect(lock.tookOverFrom).toBeNull();
    await lock.release();
  });
});
