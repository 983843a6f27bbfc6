// A model bundle as one ZIP file (src/io/bundle.ts): file names that differ by reader and
// variant, and an archive read back two ways — by fflate's unzipSync (npm `fflate`, the
// library that wrote it) and by walking the central directory as PKWARE's APPNOTE.TXT
// (the .ZIP File Format Specification, sections 4.3.12 and 4.3.16) lays it out, with each
// entry's CRC-32 checked against Node's zlib.crc32 (zlib's own implementation).
import { crc32 } from 'node:zlib';
import { unzipSync } from 'fflate';
import { describe, expect, it } from 'vitest';
import { bundleStem, zipBundle } from '../../src/io/bundle.js';

const text = (s: string) => new TextEncoder().encode(s);

function files() {
  const weights = new Uint8Array(4096);
  for (let i = 0; i < weights.length; i++) weights[i] = (i * 2654435761) >>> 24; // bytes that do not repeat in a short period
  return [
    { name: 'config.json', bytes: text('{\n  "model_type": "bert"\n}\n') },
    { name: 'model.safetensors', bytes: weights },
    { name: 'vocab.txt', bytes: text('[PAD]\n[UNK]\n[CLS]\n[SEP]\n[MASK]\nharbour\n'.repeat(20)) },
    { name: 'MODEL_CARD.md', bytes: text('# Question-answering reader\n') },
  ];
}

/** The central directory's entries: name, compression method, CRC-32 and sizes (APPNOTE 4.3.12, 4.3.16). */
function centralDirectory(zip: Uint8Array) {
  const view = new DataView(zip.buffer, zip.byteOffset, zip.byteLength);
  let end = zip.length - 22; // the end-of-central-directory record, no archive comment
  while (end >= 0 && view.getUint32(end, true) !== 0x06054b50) end--;
  expect(end).toBeGreaterThanOrEqual(0);
  const count = view.getUint16(end + 10, true);
  let at = view.getUint32(end + 16, true);
  const entries = [];
  for (let i = 0; i < count; i++) {
    expect(view.getUint32(at, true)).toBe(0x02014b50);
    const nameLength = view.getUint16(at + 28, true);
    entries.push({
      method: view.getUint16(at + 10, true),
      crc: view.getUint32(at + 16, true),
      compressed: view.getUint32(at + 20, true),
      size: view.getUint32(at + 24, true),
      name: new TextDecoder().decode(zip.subarray(at + 46, at + 46 + nameLength)),
    });
    at += 46 + nameLength + view.getUint16(at + 30, true) + view.getUint16(at + 32, true);
  }
  return entries;
}

describe('bundle names', () => {
  it('differ between the float32 and float16 bundles of one reader, and between readers', () => {
    const fp32 = bundleStem({ reader: 'fine-tuned, update 120', variant: 'float32' });
    const fp16 = bundleStem({ reader: 'fine-tuned, update 120', variant: 'float16' });
    expect(fp32).toBe('spanwright-fine-tuned-update-120-float32');
    expect(fp16).toBe('spanwright-fine-tuned-update-120-float16');
    expect(bundleStem({ reader: 'practice, update 120', variant: 'float32' })).not.toBe(fp32);
  });

  it('keep to letters, digits and hyphens, however the reader is named', () => {
    expect(bundleStem({ reader: 'base Café/../ "tiny"', variant: 'float32 + ONNX' })).toBe('spanwright-base-cafe-tiny-float32-onnx');
    expect(bundleStem({ reader: '  ', variant: '' })).toBe('spanwright-reader-model');
    const long = bundleStem({ reader: 'x'.repeat(200), variant: 'float16' });
    expect(long).toBe(`spanwright-${'x'.repeat(60)}-float16`);
  });
});

describe('zipBundle', () => {
  const stem = 'spanwright-base-float32';
  const date = new Date(2025, 2, 2, 14, 5, 0);

  it('holds every file under one folder, byte for byte', () => {
    const unpacked = unzipSync(zipBundle(files(), stem, date));
    expect(Object.keys(unpacked).sort()).toEqual(
      files()
        .map((f) => `${stem}/${f.name}`)
        .sort(),
    );
    for (const f of files()) expect(unpacked[`${stem}/${f.name}`]).toEqual(f.bytes);
  });

  it('stores the weights, deflates the text, and records zlib’s CRC-32 of each file', () => {
    const zip = zipBundle(files(), stem, date);
    const entries = centralDirectory(zip);
    expect(entries.map((e) => e.name)).toEqual(files().map((f) => `${stem}/${f.name}`));
    for (const f of files()) {
      const e = entries.find((x) => x.name === `${stem}/${f.name}`)!;
      expect(e.size, f.name).toBe(f.bytes.length);
      expect(e.crc, f.name).toBe(crc32(f.bytes));
      // method 0 = stored, 8 = deflated (APPNOTE 4.4.5)
      expect(e.method, f.name).toBe(f.name.endsWith('.safetensors') ? 0 : 8);
    }
    const vocab = entries.find((e) => e.name.endsWith('vocab.txt'))!;
    expect(vocab.compressed).toBeLessThan(vocab.size / 4); // twenty repeats of one list shrink
  });

  it('is the same archive for the same files and date', () => {
    expect(zipBundle(files(), stem, date)).toEqual(zipBundle(files(), stem, date));
  });

  it('refuses two files of one name rather than let one replace the other', () => {
    const twice = [...files(), { name: 'model.safetensors', bytes: new Uint8Array(8) }];
    expect(() => zipBundle(twice, stem, date)).toThrow(/two files named model\.safetensors/);
  });
});
