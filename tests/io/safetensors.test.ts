// Checks src/io/safetensors.ts against the safetensors format as documented by Hugging Face
// (from memory: u64 LE header length, JSON header, offsets relative to the data section,
// no holes) and the half-precision conversions against IEEE 754-2008 binary16 bit patterns.
import { describe, expect, it } from 'vitest';
import {
  MAX_HEADER_BYTES,
  SafetensorsError,
  bf16BitsToNumber,
  f16BitsToNumber,
  findDuplicateKey,
  namedToSafetensors,
  numberToBf16Bits,
  numberToF16Bits,
  readSafetensors,
  readSafetensorsHeader,
  readSafetensorsRaw,
  writeSafetensors,
} from '../../src/io/safetensors.js';
import type { NamedTensors } from '../../src/io/tensors.js';

/** A file from header text (or an object) and data bytes; `length` overrides N. */
function craft(header: string | object, data: Uint8Array | number = 0, length?: bigint): Uint8Array {
  const text = typeof header === 'string' ? header : JSON.stringify(header);
  const h = new TextEncoder().encode(text);
  return craftBytes(h, data, length);
}

function craftBytes(h: Uint8Array, data: Uint8Array | number = 0, length?: bigint): Uint8Array {
  const d = typeof data === 'number' ? new Uint8Array(data) : data;
  const out = new Uint8Array(8 + h.length + d.length);
  new DataView(out.buffer).setBigUint64(0, length ?? BigInt(h.length), true);
  out.set(h, 8);
  out.set(d, 8 + h.length);
  return out;
}

const t = (dtype: string, shape: unknown, data_offsets: unknown) => ({ dtype, shape, data_offsets });

describe('safetensors: bad files fail with a located error', () => {
  // Each case: a crafted file, and a fragment the error message must contain.
  const cases: Array<[string, () => Uint8Array, RegExp]> = [
    ['shorter than the length field', () => new Uint8Array(5), /5 bytes; .*8-byte header length/],
    ['header length over the 100 MB limit', () => craft('{}', 0, 2n ** 40n), /header length.*exceeds the 100000000-byte limit/],
    ['header length past the end of the file', () => craft('{}', 0, 1000n), /header length 1000 is more than the 2 bytes/],
    ['header length too small', () => craft('{}', 0, 1n), /header length 1 is too small/],
    ['header not UTF-8', () => craftBytes(new Uint8Array([0x7b, 0xff, 0x7d])), /header: the header is not valid UTF-8/],
    ['header does not start with {', () => craft(' {}'), /must start with '\{'/],
    ['header an array', () => craft('[]'), /must start with '\{'/],
    ['header not JSON', () => craft('{"a": '), /not valid JSON/],
    [
      'duplicate tensor name',
      () => craft('{"w":{"dtype":"F32","shape":[1],"data_offsets":[0,4]},"w":{"dtype":"F32","shape":[1],"data_offsets":[4,8]}}', 8),
      /key "w" appears twice/,
    ],
    [
      'duplicate field inside an entry',
      () => craft('{"w":{"dtype":"F32","dtype":"F16","shape":[1],"data_offsets":[0,4]}}', 4),
      /key "dtype" appears twice inside "w"/,
    ],
    ['entry not an object', () => craft({ w: [1, 2] }), /tensor "w": must be an object/],
    ['unknown dtype', () => craft({ w: t('F8', [1], [0, 1]) }, 1), /tensor "w", field dtype: unknown dtype "F8"/],
    ['dtype missing', () => craft({ w: { shape: [1], data_offsets: [0, 4] } }, 4), /tensor "w", field dtype: missing/],
    [
      'negative dimension',
      () => craft({ w: t('F32', [-1], [0, 4]) }, 4),
      /field shape: dimensions must be non-negative integers, found -1/,
    ],
    ['fractional dimension', () => craft({ w: t('F32', [1.5], [0, 4]) }, 4), /field shape: .* found 1.5/],
    ['dimension a string', () => craft({ w: t('F32', ['2'], [0, 8]) }, 8), /field shape: .* found "2"/],
    ['shape not an array', () => craft({ w: t('F32', 4, [0, 16]) }, 16), /field shape: missing or not an array/],
    ['offsets not a pair', () => craft({ w: t('F32', [1], [0]) }, 4), /field data_offsets: must be an array \[begin, end\]/],
    ['offset not an integer', () => craft({ w: t('F32', [1], [0, 4.5]) }, 4), /field data_offsets: offsets must be non-negative integers/],
    ['offset negative', () => craft({ w: t('F32', [1], [-4, 0]) }, 4), /offsets must be non-negative integers, found -4/],
    ['end before begin', () => craft({ w: t('F32', [0], [4, 0]) }, 4), /end 0 is before begin 4/],
    ['end past the data', () => craft({ w: t('F32', [4], [0, 16]) }, 8), /end 16 is past the data section's 8 bytes/],
    ['length not shape × dtype size', () => craft({ w: t('F32', [3], [0, 8]) }, 8), /holds 8 bytes, but shape \[3\] of F32 needs 12/],
    [
      'overlapping tensors',
      () => craft({ a: t('F32', [2], [0, 8]), b: t('F32', [2], [4, 12]) }, 12),
      /tensor "b", field data_offsets: bytes 4\.\.12 overlap tensor "a"/,
    ],
    ['a hole at the start', () => craft({ a: t('F32', [1], [4, 8]) }, 8), /bytes 0\.\.4 of the data section belong to no tensor/],
    [
      'a hole between tensors',
      () => craft({ a: t('F32', [1], [0, 4]), b: t('F32', [1], [8, 12]) }, 12),
      /tensor "b".*bytes 4\.\.8 of the data section belong to no tensor/,
    ],
    ['trailing bytes', () => craft({ a: t('F32', [1], [0, 4]) }, 6), /last 2 bytes of the data section belong to no tensor/],
    ['metadata value not a string', () => craft({ __metadata__: { epochs: 3 } }), /field __metadata__: value of "epochs" must be a string/],
    ['metadata not an object', () => craft({ __metadata__: 'x' }), /field __metadata__: must be an object/],
    ['element count overflows', () => craft({ w: t('U8', [2 ** 30, 2 ** 30, 2 ** 30], [0, 0]) }), /element count is too large/],
  ];
  for (const [what, make, message] of cases) {
    it(`rejects: ${what}`, () => {
      const bytes = make();
      let error: unknown;
      try {
        readSafetensorsRaw(bytes, 'bad.safetensors');
      } catch (e) {
        error = e;
      }
      expect(error).toBeInstanceOf(SafetensorsError);
      expect((error as Error).message).toMatch(/^bad\.safetensors: /);
      expect((error as Error).message).toMatch(message);
    });
  }

  it('accepts a header padded with trailing spaces, an empty tensor and metadata', () => {
    const bytes = craft(
      `{"__metadata__":{"format":"pt"},"e":{"dtype":"F32","shape":[0,3],"data_offsets":[0,0]},"w":{"dtype":"I8","shape":[2],"data_offsets":[0,2]}}    `,
      new Uint8Array([0xff, 0x02]),
    );
    const { header, tensors } = readSafetensorsRaw(bytes);
    expect(header.metadata).toEqual({ format: 'pt' });
    expect(tensors.get('e')!.data.length).toBe(0);
    expect(Array.from(tensors.get('w')!.data as Int8Array)).toEqual([-1, 2]);
  });

  it('refuses a header nested deeper than the format needs, however deep, without exhausting the stack', () => {
    // crafted: 200 000 levels of arrays inside one tensor entry (a probe of issue 15, item 6)
    const deep = `{"w":{"dtype":"F32","shape":${'['.repeat(200_000)}${']'.repeat(200_000)},"data_offsets":[0,0]}}`;
    expect(() => readSafetensorsRaw(craft(deep), 'deep.safetensors')).toThrow(
      /deep\.safetensors: .*nests 200002 levels deep; a safetensors header has at most 3/,
    );
    // brackets inside strings are text, not nesting
    const named = craft('{"__metadata__":{"note":"[[[[{{{{"},"e":{"dtype":"F32","shape":[0],"data_offsets":[0,0]}}');
    expect(readSafetensorsRaw(named).header.metadata).toEqual({ note: '[[[[{{{{' });
  });

  it('finds duplicate keys only within one object', () => {
    expect(findDuplicateKey('{"a":{"x":1},"b":{"x":2}}')).toBeNull();
    expect(findDuplicateKey('{"a":[{"x":1,"y":"}\\"x"}],"a\\u0062":2,"ab":3}')).toEqual({ key: 'ab', path: '' });
  });
});

describe('safetensors: round trips', () => {
  const named: NamedTensors = new Map([
    ['bert.embeddings.word_embeddings.weight', { shape: [3, 4], data: Float32Array.from({ length: 12 }, (_, i) => (i - 5) * 0.37) }],
    ['qa_outputs.bias', { shape: [2], data: new Float32Array([0.5, -1.25]) }],
    ['scalar', { shape: [], data: new Float32Array([7]) }],
  ]);

  it('F32 is exact and keeps names, order, shapes and metadata', () => {
    const bytes = namedToSafetensors(named, { metadata: { source: 'test' } });
    const header = readSafetensorsHeader(bytes);
    expect(header.dataStart % 8).toBe(0); // header padded so the data section is 8-aligned
    const back = readSafetensors(bytes);
    expect([...back.tensors.keys()]).toEqual([...named.keys()]);
    for (const [name, tensor] of named) {
      expect(back.tensors.get(name)!.shape).toEqual(tensor.shape);
      expect(Array.from(back.tensors.get(name)!.data)).toEqual(Array.from(tensor.data));
      expect(back.dtypes.get(name)).toBe('F32');
    }
    expect(back.metadata).toEqual({ source: 'test' });
  });

  it('F16 and BF16 round to the nearest representable value', () => {
    for (const dtype of ['F16', 'BF16'] as const) {
      const back = readSafetensors(namedToSafetensors(named, { dtype }));
      // relative error ≤ 2^-11 (binary16, 10 fraction bits) or 2^-8 (bfloat16, 7 bits)
      const bound = dtype === 'F16' ? 2 ** -11 : 2 ** -8;
      for (const [name, tensor] of named) {
        expect(back.dtypes.get(name)).toBe(dtype);
        const got = back.tensors.get(name)!.data;
        tensor.data.forEach((v, i) => expect(Math.abs(got[i]! - v)).toBeLessThanOrEqual(Math.abs(v) * bound));
      }
    }
  });

  it('I8 and I32 are stored as is', () => {
    const bytes = writeSafetensors([
      ['q', { dtype: 'I8', shape: [2, 2], data: new Int8Array([-127, 0, 5, 127]) }],
      ['i', { dtype: 'I32', shape: [2], data: new Int32Array([-70000, 3]) }],
    ]);
    const { tensors } = readSafetensorsRaw(bytes);
    expect(tensors.get('q')!.dtype).toBe('I8');
    expect(Array.from(tensors.get('q')!.data as Int8Array)).toEqual([-127, 0, 5, 127]);
    expect(Array.from(tensors.get('i')!.data as Int32Array)).toEqual([-70000, 3]);
    expect(Array.from(readSafetensors(bytes).tensors.get('q')!.data)).toEqual([-127, 0, 5, 127]);
  });

  it('reads F64, I64 and U8 as float32 values', () => {
    const data = new Uint8Array(8 + 16 + 1);
    const dv = new DataView(data.buffer);
    dv.setFloat64(0, 0.1, true);
    dv.setBigInt64(8, -3n, true);
    dv.setBigInt64(16, 511n, true);
    data[24] = 200;
    const bytes = craft({ d: t('F64', [1], [0, 8]), l: t('I64', [2], [8, 24]), u: t('U8', [1], [24, 25]) }, data);
    const { tensors } = readSafetensors(bytes);
    expect(tensors.get('d')!.data[0]).toBe(Math.fround(0.1));
    expect(Array.from(tensors.get('l')!.data)).toEqual([-3, 511]);
    expect(Array.from(tensors.get('u')!.data)).toEqual([200]);
  });

  it('refuses to write a shape that does not match the data', () => {
    expect(() => writeSafetensors([['w', { dtype: 'F32', shape: [3], data: new Float32Array(2) }]])).toThrow(
      /shape \[3\] does not match its 2 values/,
    );
  });
});

describe('half precision against IEEE 754-2008 binary16 and bfloat16 bit patterns', () => {
  // Bit patterns of binary16 (IEEE 754-2008; values from memory, each exactly a power-of-two sum)
  const halves: Array<[number, number]> = [
    [0x0000, 0],
    [0x3c00, 1],
    [0xc000, -2],
    [0x3c01, 1 + 2 ** -10], // next after one
    [0x3bff, 1 - 2 ** -11], // largest below one
    [0x7bff, 65504], // largest finite
    [0x0400, 2 ** -14], // smallest normal
    [0x03ff, 2 ** -14 - 2 ** -24], // largest subnormal
    [0x0001, 2 ** -24], // smallest subnormal
    [0x3555, 0.333251953125], // nearest to 1/3
    [0x7c00, Infinity],
    [0xfc00, -Infinity],
  ];
  it('decodes and encodes the known patterns', () => {
    for (const [bits, value] of halves) {
      expect(f16BitsToNumber(bits)).toBe(value);
      expect(numberToF16Bits(value)).toBe(bits);
    }
    expect(Object.is(f16BitsToNumber(0x8000), -0)).toBe(true);
    expect(numberToF16Bits(-0)).toBe(0x8000);
    expect(Number.isNaN(f16BitsToNumber(0x7e00))).toBe(true);
    expect(numberToF16Bits(NaN) & 0x7c00).toBe(0x7c00);
    expect(numberToF16Bits(NaN) & 0x3ff).not.toBe(0);
  });

  it('rounds to nearest, ties to even', () => {
    expect(numberToF16Bits(1 / 3)).toBe(0x3555);
    expect(numberToF16Bits(1 + 2 ** -11)).toBe(0x3c00); // tie → even (fraction 0)
    expect(numberToF16Bits(1 + 3 * 2 ** -11)).toBe(0x3c02); // tie → even (fraction 2)
    expect(numberToF16Bits(65519)).toBe(0x7bff);
    expect(numberToF16Bits(65520)).toBe(0x7c00); // tie between 65504 and 2^16 → even → Infinity
    expect(numberToF16Bits(1e6)).toBe(0x7c00);
    expect(numberToF16Bits(2 ** -25)).toBe(0x0000); // tie between 0 and the smallest subnormal → 0
    expect(numberToF16Bits(1.5 * 2 ** -25)).toBe(0x0001);
    expect(numberToF16Bits(3 * 2 ** -25)).toBe(0x0002); // tie between 1 and 2 subnormal steps → 2
    expect(numberToF16Bits(2 ** -14 - 2 ** -25)).toBe(0x0400); // rounds up out of the subnormals
  });

  it('every finite binary16 value survives number → bits → number', () => {
    const wrong: number[] = [];
    for (let bits = 0; bits < 0x10000; bits++) {
      if ((bits & 0x7c00) === 0x7c00 && bits & 0x3ff) continue; // NaN payloads
      if (numberToF16Bits(f16BitsToNumber(bits)) !== bits) wrong.push(bits);
    }
    expect(wrong).toEqual([]);
  });

  it('bfloat16: known patterns and rounding', () => {
    // bfloat16 is the top half of binary32 (IEEE 754 single), as Google's TPU documents define it (from memory)
    expect(bf16BitsToNumber(0x3f80)).toBe(1);
    expect(bf16BitsToNumber(0xc000)).toBe(-2);
    expect(bf16BitsToNumber(0x7f80)).toBe(Infinity);
    expect(bf16BitsToNumber(0x4049)).toBe(3.140625);
    expect(numberToBf16Bits(Math.PI)).toBe(0x4049);
    expect(numberToBf16Bits(1 + 2 ** -8)).toBe(0x3f80); // tie → even
    expect(numberToBf16Bits(1 + 3 * 2 ** -8)).toBe(0x3f82); // tie → even
    expect(numberToBf16Bits(-0)).toBe(0x8000);
    for (let bits = 0; bits < 0x10000; bits += 7) {
      if ((bits & 0x7f80) === 0x7f80 && bits & 0x7f) continue;
      expect(numberToBf16Bits(bf16BitsToNumber(bits))).toBe(bits);
    }
  });

  it(`the limit is the reference reader's: ${MAX_HEADER_BYTES} bytes`, () => {
    // a header of exactly the limit is not rejected for its length (it fails later, as a short file)
    expect(() => readSafetensorsHeader(craft('{}', 0, BigInt(MAX_HEADER_BYTES)))).toThrow(/is more than the 2 bytes/);
  });
});
