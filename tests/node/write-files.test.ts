// How the CLI and the recipe write files (src/node/write-files.ts) and sweeps what a killed save left
// (FsCheckpointStore.sweepOrphans): all-or-nothing folders, no temporary file left behind,
// and a failure that names the file, its size and the reason in words.
import { mkdtempSync, mkdirSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { writeErrorMessage, writeFileAtomically, writeFilesAtomically } from '../../src/node/write-files.js';

const dir = mkdtempSync(join(tmpdir(), 'spanwright-write-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('writing files', () => {
  it('writes a folder all or nothing: a failed file leaves the old files and no temporary file', async () => {
    const out = join(dir, 'model');
    await writeFilesAtomically(out, [
      { name: 'config.json', bytes: 'old config' },
      { name: 'model.safetensors', bytes: new Uint8Array([1, 2, 3]) },
    ]);
    // the second file's folder does not exist: its write fails after the first was written
    await expect(
      writeFilesAtomically(out, [
        { name: 'config.json', bytes: 'new config' },
        { name: 'missing/model.safetensors', bytes: new Uint8Array(1000) },
      ]),
    ).rejects.toThrow(/cannot write .*missing\/model\.safetensors \(1000 bytes\): its folder does not exist \(ENOENT\)/);
    expect(readFileSync(join(out, 'config.json'), 'utf8')).toBe('old config');
    expect(readdirSync(out).sort()).toEqual(['config.json', 'model.safetensors']);
  });

  it('says which file could not be written, how large it was, and why in words', async () => {
    const full = Object.assign(new Error('ENOSPC: no space left on device, write'), { code: 'ENOSPC' });
    const message = await writeErrorMessage(full, join(dir, 'x.safetensors'), 3 * 1024 * 1024);
    expect(message).toMatch(/^cannot write .*x\.safetensors \(3\.0 MiB\): the disk is full \(ENOSPC; [\d.]+ (MiB|KiB|bytes) free\)$/);
    // a real failure of the same path: a folder stands where the file should go
    mkdirSync(join(dir, 'taken'));
    await expect(writeFileAtomically(join(dir, 'taken'), 'x')).rejects.toThrow(
      /cannot write .*taken \(1 bytes\): a folder has that name \(EISDIR\)|cannot write .*taken/,
    );
    expect(readdirSync(dir).filter((n) => n.includes('.tmp-'))).toEqual([]);
  });
});

describe('sweeping an interrupted checkpoint save', () => {
  it('removes temporary files and blobs without a summary, and keeps whole checkpoints', async () => {
    const folder = join(dir, 'checkpoints');
    mkdirSync(folder);
    writeFileSync(join(folder, 'step-1.safetensors'), 'blob');
    writeFileSync(join(folder, 'step-1.json'), '{}');
    writeFileSync(join(folder, 'step-2.safetensors'), 'blob of a save killed before its summary');
    writeFileSync(join(folder, '.step-3.safetensors.tmp-abc123'), 'half');
    const removed = await new FsCheckpointStore(folder).sweepOrphans();
    expect(removed.sort()).toEqual(['.step-3.safetensors.tmp-abc123', 'step-2.safetensors']);
    expect(readdirSync(folder).sort()).toEqual(['step-1.json', 'step-1.safetensors']);
  });
});
