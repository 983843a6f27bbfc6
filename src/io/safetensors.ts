// defines: readSafetensorsHeader, readSafetensorsRaw, readSafetensors, writeSafetensors,
// namedToSafetensors, SafetensorsError, and the half-precision conversions f16/bf16 ↔ f32.
//
// The format is safetensors as documented by Hugging Face (from memory):
//   1. 8 bytes: N, an unsigned 64-bit little-endian integer, the size of the header.
//   2. N bytes: a UTF-8 JSON object, starting with '{' and possibly padded at the end with
//      spaces (0x20). Each key is a tensor name mapped to
//      `{"dtype": "F32", "shape": [2, 3], "data_offsets": [begin, end]}`; the optional key
//      "__metadata__" maps to an object of string → string.
//   3. The data section: every tensor's bytes, row-major, little-endian. Offsets count from
//      the first byte after the header. The tensors must cover the section exactly — no
//      holes, no overlaps (the spec forbids holes so that a file cannot hide other content).
// The reference reader caps the header at 100 MB; so does this one. Every check below
// fails with a SafetensorsError naming the file, the tensor and the field.

import type { NamedTensors } from './tensors.js';

/** Element types this module knows, with their byte widths. */
export const DTYPE_BYTES = {
  F64: 8,
  F32: 4,
  F16: 2,
  BF16: 2,
  I64: 8,
  I32: 4,
  I16: 2,
  I8: 1,
  U8: 1,
  BOOL: 1,
} as const;

export type SafetensorsDtype = keyof typeof DTYPE_BYTES;

/** The dtypes `writeSafetensors` accepts. */
export type WritableDtype = 'F32' | 'F16' | 'BF16' | 'I8' | 'I32';

/** The reference implementation's limit on the header size (100 MB, from memory). */
export const MAX_HEADER_BYTES = 100_000_000;

const METADATA_KEY = '__metadata__';

export class SafetensorsError extends Error {
  constructor(
    readonly file: string,
    readonly tensor: string | null,
    readonly field: string | null,
    detail: string,
  ) {
    const where = [tensor === null ? null : `tensor "${tensor}"`, field === null ? null : `field ${field}`]
      .filter((s) => s !== null)
      .join(', ');
    super(`${file}: ${where ? `${where}: ` : ''}${detail}`);
    this.name = 'SafetensorsError';
  }
}

export interface SafetensorsEntry {
  name: string;
  dtype: SafetensorsDtype;
  shape: number[];
  /** byte offsets relative to the start of the data section */
  begin: number;
  end: number;
}

export interface SafetensorsHeader {
  /** entries in the order they appear in the header */
  entries: SafetensorsEntry[];
  metadata: Record<string, string>;
  /** N, the header's length in bytes */
  headerBytes: number;
  /** offset of the data section in the file: 8 + N */
  dataStart: number;
}

/** A tensor as stored, before any conversion. F16 and BF16 arrive as their raw 16-bit words. */
export type RawTensor =
  | { dtype: 'F64'; shape: number[]; data: Float64Array }
  | { dtype: 'F32'; shape: number[]; data: Float32Array }
  | { dtype: 'F16' | 'BF16' | 'I16'; shape: number[]; data: Uint16Array | Int16Array }
  | { dtype: 'I64'; shape: number[]; data: BigInt64Array }
  | { dtype: 'I32'; shape: number[]; data: Int32Array }
  | { dtype: 'I8'; shape: number[]; data: Int8Array }
  | { dtype: 'U8' | 'BOOL'; shape: number[]; data: Uint8Array };

/** A tensor to write: floats as Float32Array (converted to F16/BF16 on request), ints as is. */
export type WritableTensor =
  | { dtype: 'F32' | 'F16' | 'BF16'; shape: number[]; data: Float32Array }
  | { dtype: 'I8'; shape: number[]; data: Int8Array }
  | { dtype: 'I32'; shape: number[]; data: Int32Array };

// ---------------------------------------------------------------------------------------
// Reading

/**
 * Parses and checks the header against the file's size; reads no tensor data. `bytes`
 * may hold only the start of the file (the 8-byte length and the header) when `fileSize`
 * gives the whole file's size — so a file too large to read at once can be inspected.
 */
export function readSafetensorsHeader(bytes: Uint8Array, file = 'model.safetensors', fileSize = bytes.length): SafetensorsHeader {
  const fail = (detail: string, tensor: string | null = null, field: string | null = null): never => {
    throw new SafetensorsError(file, tensor, field, detail);
  };

  // 1. the header length
  if (fileSize < 8 || bytes.length < 8) {
    fail(`the file is ${fileSize} bytes; a safetensors file starts with an 8-byte header length`);
  }
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const n64 = view.getBigUint64(0, true);
  if (n64 > BigInt(MAX_HEADER_BYTES)) {
    fail(`header length ${n64} exceeds the ${MAX_HEADER_BYTES}-byte limit (is this a safetensors file?)`, null, 'header length');
  }
  const headerBytes = Number(n64);
  if (headerBytes > fileSize - 8 || headerBytes > bytes.length - 8) {
    fail(`header length ${headerBytes} is more than the ${fileSize - 8} bytes after it (is the file cut short?)`, null, 'header length');
  }
  if (headerBytes < 2) fail(`header length ${headerBytes} is too small for a JSON object`, null, 'header length');

  // 2. the header text: UTF-8, a JSON object, no duplicate keys
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true, ignoreBOM: true }).decode(bytes.subarray(8, 8 + headerBytes));
  } catch {
    return fail('the header is not valid UTF-8', null, 'header');
  }
  if (text[0] !== '{') fail(`the header must start with '{', found ${JSON.stringify(text.slice(0, 8))}`, null, 'header');
  // the format nests three levels at most (header → tensor entry → shape array); deeper
  // text is no safetensors header, and refusing it keeps the key walker below shallow
  const depth = nestingDepth(text);
  if (depth > MAX_HEADER_DEPTH)
    fail(`the header nests ${depth} levels deep; a safetensors header has at most ${MAX_HEADER_DEPTH}`, null, 'header');
  let parsed: unknown;
  try {
    parsed = JSON.parse(text);
  } catch (err) {
    return fail(`the header is not valid JSON (${(err as Error).message})`, null, 'header');
  }
  if (parsed === null || typeof parsed !== 'object' || Array.isArray(parsed)) {
    fail('the header must be a JSON object', null, 'header');
  }
  // JSON.parse keeps the last of two equal keys silently; a file with two entries under one
  // name would load a tensor nobody can see in the header, so scan the text for repeats.
  const duplicate = findDuplicateKey(text);
  if (duplicate !== null) {
    fail(`the key ${JSON.stringify(duplicate.key)} appears twice${duplicate.path ? ` inside ${duplicate.path}` : ''}`, null, 'header');
  }

  const dataStart = 8 + headerBytes;
  const dataBytes = fileSize - dataStart;
  const header = parsed as Record<string, unknown>;

  // 3. metadata: string → string
  const metadata: Record<string, string> = {};
  if (METADATA_KEY in header) {
    const meta = header[METADATA_KEY];
    if (meta === null || typeof meta !== 'object' || Array.isArray(meta)) {
      fail('must be an object of string values', null, METADATA_KEY);
    }
    for (const [k, v] of Object.entries(meta as Record<string, unknown>)) {
      if (typeof v !== 'string') fail(`value of "${k}" must be a string, found ${jsonType(v)}`, null, METADATA_KEY);
      metadata[k] = v as string;
    }
  }

  // 4. each entry
  const entries: SafetensorsEntry[] = [];
  for (const [name, raw] of Object.entries(header)) {
    if (name === METADATA_KEY) continue;
    if (raw === null || typeof raw !== 'object' || Array.isArray(raw)) {
      fail(`must be an object {dtype, shape, data_offsets}, found ${jsonType(raw)}`, name);
    }
    const entry = raw as Record<string, unknown>;
    const dtype = entry['dtype'];
    if (typeof dtype !== 'string') fail(`missing or not a string`, name, 'dtype');
    if (!Object.hasOwn(DTYPE_BYTES, dtype as string)) {
      fail(`unknown dtype ${JSON.stringify(dtype)} (known: ${Object.keys(DTYPE_BYTES).join(', ')})`, name, 'dtype');
    }
    const shape = entry['shape'];
    if (!Array.isArray(shape)) fail(`missing or not an array`, name, 'shape');
    let count = 1;
    for (const d of shape as unknown[]) {
      if (typeof d !== 'number' || !Number.isSafeInteger(d) || d < 0) {
        fail(`dimensions must be non-negative integers, found ${JSON.stringify(d)}`, name, 'shape');
      }
      count *= d as number;
      if (!Number.isSafeInteger(count)) fail('the element count is too large', name, 'shape');
    }
    const offsets = entry['data_offsets'];
    if (!Array.isArray(offsets) || offsets.length !== 2) fail('must be an array [begin, end]', name, 'data_offsets');
    const [begin, end] = offsets as unknown[];
    for (const o of [begin, end]) {
      if (typeof o !== 'number' || !Number.isSafeInteger(o) || o < 0) {
        fail(`offsets must be non-negative integers, found ${JSON.stringify(o)}`, name, 'data_offsets');
      }
    }
    const b = begin as number;
    const e = end as number;
    if (e < b) fail(`end ${e} is before begin ${b}`, name, 'data_offsets');
    if (e > dataBytes) {
      fail(`end ${e} is past the data section's ${dataBytes} bytes (is the file cut short?)`, name, 'data_offsets');
    }
    const width = DTYPE_BYTES[dtype as SafetensorsDtype];
    if (e - b !== count * width) {
      fail(`holds ${e - b} bytes, but shape [${(shape as number[]).join(', ')}] of ${dtype} needs ${count * width}`, name, 'data_offsets');
    }
    entries.push({ name, dtype: dtype as SafetensorsDtype, shape: [...(shape as number[])], begin: b, end: e });
  }

  // 5. the entries tile the data section: no overlap, no hole, nothing after the last
  const byStart = [...entries].sort((x, y) => x.begin - y.begin || x.end - y.end);
  let covered = 0;
  for (const entry of byStart) {
    if (entry.begin < covered) {
      const other = byStart.find((o) => o !== entry && o.begin < entry.end && entry.begin < o.end && o.end > o.begin);
      fail(`bytes ${entry.begin}..${entry.end} overlap tensor "${other?.name ?? '?'}"`, entry.name, 'data_offsets');
    }
    if (entry.begin > covered) {
      fail(
        `bytes ${covered}..${entry.begin} of the data section belong to no tensor (the format allows no holes)`,
        entry.name,
        'data_offsets',
      );
    }
    covered = entry.end;
  }
  if (covered !== dataBytes) {
    fail(
      `the last ${dataBytes - covered} bytes of the data section belong to no tensor (the format allows no holes)`,
      null,
      'data_offsets',
    );
  }

  return { entries, metadata, headerBytes, dataStart };
}

/** Reads every tensor in its stored dtype (a copy; `bytes` may be released afterwards). */
export function readSafetensorsRaw(
  bytes: Uint8Array,
  file = 'model.safetensors',
): { header: SafetensorsHeader; tensors: Map<string, RawTensor> } {
  const header = readSafetensorsHeader(bytes, file);
  const tensors = new Map<string, RawTensor>();
  for (const e of header.entries) {
    const slice = bytes.slice(header.dataStart + e.begin, header.dataStart + e.end); // a copy, aligned at 0
    tensors.set(e.name, rawFromBytes(e.dtype, e.shape, slice));
  }
  return { header, tensors };
}

/**
 * Reads a file as NamedTensors: every tensor converted to float32 (F16 and BF16 exactly;
 * integers by value; F64 rounded). Also returns each tensor's stored dtype.
 */
export function readSafetensors(
  bytes: Uint8Array,
  file = 'model.safetensors',
): { tensors: NamedTensors; metadata: Record<string, string>; dtypes: Map<string, SafetensorsDtype> } {
  const { header, tensors: raw } = readSafetensorsRaw(bytes, file);
  const tensors: NamedTensors = new Map();
  const dtypes = new Map<string, SafetensorsDtype>();
  for (const [name, t] of raw) {
    tensors.set(name, { shape: t.shape, data: rawToFloat32(t) });
    dtypes.set(name, t.dtype);
  }
  return { tensors, metadata: header.metadata, dtypes };
}

/** Converts any stored tensor's values to float32. */
export function rawToFloat32(t: RawTensor): Float32Array {
  switch (t.dtype) {
    case 'F32':
      return t.data;
    case 'F16':
      return f16ToF32Array(t.data as Uint16Array);
    case 'BF16':
      return bf16ToF32Array(t.data as Uint16Array);
    case 'I64': {
      const out = new Float32Array(t.data.length);
      for (let i = 0; i < out.length; i++) out[i] = Number(t.data[i]!);
      return out;
    }
    default:
      return Float32Array.from(t.data as ArrayLike<number>);
  }
}

const LITTLE_ENDIAN_HOST = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

function rawFromBytes(dtype: SafetensorsDtype, shape: number[], slice: Uint8Array): RawTensor {
  const buf = slice.buffer as ArrayBuffer; // `slice` is a fresh copy starting at offset 0
  const n = slice.byteLength / DTYPE_BYTES[dtype];
  if (!LITTLE_ENDIAN_HOST && DTYPE_BYTES[dtype] > 1) swapBytes(slice, DTYPE_BYTES[dtype]);
  switch (dtype) {
    case 'F64':
      return { dtype, shape, data: new Float64Array(buf, 0, n) };
    case 'F32':
      return { dtype, shape, data: new Float32Array(buf, 0, n) };
    case 'F16':
    case 'BF16':
      return { dtype, shape, data: new Uint16Array(buf, 0, n) };
    case 'I16':
      return { dtype, shape, data: new Int16Array(buf, 0, n) };
    case 'I64':
      return { dtype, shape, data: new BigInt64Array(buf, 0, n) };
    case 'I32':
      return { dtype, shape, data: new Int32Array(buf, 0, n) };
    case 'I8':
      return { dtype, shape, data: new Int8Array(buf, 0, n) };
    case 'U8':
    case 'BOOL':
      return { dtype, shape, data: new Uint8Array(buf, 0, n) };
  }
}

/** Reverses each `width`-byte word in place (only on a big-endian host). */
function swapBytes(b: Uint8Array, width: number): void {
  for (let i = 0; i < b.length; i += width) b.subarray(i, i + width).reverse();
}

function jsonType(v: unknown): string {
  if (v === null) return 'null';
  if (Array.isArray(v)) return 'an array';
  return typeof v === 'object' ? 'an object' : `a ${typeof v}`;
}

/** Objects and arrays nest this deep in a safetensors header: {name: {shape: [..]}}. */
const MAX_HEADER_DEPTH = 3;

/** The deepest nesting of objects and arrays in a JSON text, by one pass over it (brackets inside strings ignored). */
function nestingDepth(text: string): number {
  let depth = 0;
  let deepest = 0;
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const c = text[i]!;
    if (inString) {
      if (c === '\\') i++;
      else if (c === '"') inString = false;
    } else if (c === '"') inString = true;
    else if (c === '{' || c === '[') deepest = Math.max(deepest, ++depth);
    else if (c === '}' || c === ']') depth--;
  }
  return deepest;
}

/**
 * The first key repeated within one object of a *valid* JSON text, with the object's path
 * ("" for the top level). A small walker over the RFC 8259 grammar; it trusts the text to
 * be valid (JSON.parse has already accepted it).
 */
export function findDuplicateKey(text: string): { key: string; path: string } | null {
  let i = 0;
  const skipSpace = (): void => {
    while (i < text.length && ' \t\n\r'.includes(text[i]!)) i++;
  };
  const readString = (): string => {
    const start = i;
    i++; // opening quote
    while (text[i] !== '"') i += text[i] === '\\' ? 2 : 1;
    i++; // closing quote
    return JSON.parse(text.slice(start, i)) as string;
  };
  const value = (path: string): { key: string; path: string } | null => {
    skipSpace();
    const c = text[i];
    if (c === '{') {
      i++;
      const seen = new Set<string>();
      skipSpace();
      if (text[i] === '}') {
        i++;
        return null;
      }
      for (;;) {
        skipSpace();
        const key = readString();
        if (seen.has(key)) return { key, path };
        seen.add(key);
        skipSpace();
        i++; // ':'
        const inner = value(path ? `${path}.${key}` : JSON.stringify(key));
        if (inner) return inner;
        skipSpace();
        if (text[i++] === '}') return null; // else ','
      }
    }
    if (c === '[') {
      i++;
      skipSpace();
      if (text[i] === ']') {
        i++;
        return null;
      }
      for (let k = 0; ; k++) {
        const inner = value(`${path}[${k}]`);
        if (inner) return inner;
        skipSpace();
        if (text[i++] === ']') return null; // else ','
      }
    }
    if (c === '"') {
      readString();
      return null;
    }
    while (i < text.length && !',}] \t\n\r'.includes(text[i]!)) i++; // number, true, false, null
    return null;
  };
  return value('');
}

// ---------------------------------------------------------------------------------------
// Writing

/**
 * Serialises tensors in the given order (offsets ascending, so the section has no holes),
 * the header padded with spaces so the data section starts on an 8-byte boundary.
 */
export function writeSafetensors(tensors: Iterable<[string, WritableTensor]>, metadata: Record<string, string> = {}): Uint8Array {
  const header: Record<string, unknown> = {};
  if (Object.keys(metadata).length > 0) header[METADATA_KEY] = { ...metadata };
  const parts: Uint8Array[] = [];
  let offset = 0;
  for (const [name, t] of tensors) {
    if (name === METADATA_KEY) throw new Error(`writeSafetensors: "${METADATA_KEY}" is reserved and cannot name a tensor`);
    if (Object.hasOwn(header, name)) throw new Error(`writeSafetensors: tensor "${name}" given twice`);
    const count = t.shape.reduce((a, d) => a * d, 1);
    if (t.shape.some((d) => !Number.isSafeInteger(d) || d < 0) || count !== t.data.length) {
      throw new Error(`writeSafetensors: tensor "${name}": shape [${t.shape.join(', ')}] does not match its ${t.data.length} values`);
    }
    const body = tensorBytes(t);
    header[name] = { dtype: t.dtype, shape: [...t.shape], data_offsets: [offset, offset + body.length] };
    parts.push(body);
    offset += body.length;
  }
  let json = JSON.stringify(header);
  const encoder = new TextEncoder();
  let headerBytes = encoder.encode(json);
  const pad = (8 - (headerBytes.length % 8)) % 8;
  if (pad > 0) {
    json += ' '.repeat(pad);
    headerBytes = encoder.encode(json);
  }
  const out = new Uint8Array(8 + headerBytes.length + offset);
  new DataView(out.buffer).setBigUint64(0, BigInt(headerBytes.length), true);
  out.set(headerBytes, 8);
  let at = 8 + headerBytes.length;
  for (const p of parts) {
    out.set(p, at);
    at += p.length;
  }
  return out;
}

/** NamedTensors → safetensors bytes, every tensor stored as `dtype` (F32 by default). */
export function namedToSafetensors(
  named: NamedTensors,
  options: { dtype?: 'F32' | 'F16' | 'BF16'; metadata?: Record<string, string> } = {},
): Uint8Array {
  const dtype = options.dtype ?? 'F32';
  const entries: Array<[string, WritableTensor]> = [];
  for (const [name, t] of named) entries.push([name, { dtype, shape: t.shape, data: t.data }]);
  return writeSafetensors(entries, options.metadata);
}

function tensorBytes(t: WritableTensor): Uint8Array {
  let words: Float32Array | Uint16Array | Int8Array | Int32Array;
  if (t.dtype === 'F16') words = f32ToF16Array(t.data);
  else if (t.dtype === 'BF16') words = f32ToBf16Array(t.data);
  else words = t.data;
  return littleEndianBytes(words);
}

/** A copy of a typed array's elements as little-endian bytes (whatever the host's byte order). */
export function littleEndianBytes(words: Float32Array | Uint16Array | Int8Array | Int32Array | BigInt64Array | Float64Array): Uint8Array {
  const out = new Uint8Array(words.byteLength);
  out.set(new Uint8Array(words.buffer, words.byteOffset, words.byteLength));
  if (!LITTLE_ENDIAN_HOST && words.BYTES_PER_ELEMENT > 1) swapBytes(out, words.BYTES_PER_ELEMENT);
  return out;
}

// ---------------------------------------------------------------------------------------
// Half precision. IEEE 754-2008 binary16 ("half"): 1 sign bit, 5 exponent bits (bias 15),
// 10 fraction bits. bfloat16: the top 16 bits of a binary32 (1 sign, 8 exponent, 7 fraction).

const f32Scratch = new Float32Array(1);
const u32Scratch = new Uint32Array(f32Scratch.buffer);

/** binary16 bits → number (exact: every half value is a float32 value). */
export function f16BitsToNumber(h: number): number {
  const sign = h & 0x8000 ? -1 : 1;
  const exp = (h >> 10) & 0x1f;
  const frac = h & 0x3ff;
  if (exp === 0) return sign * frac * 2 ** -24; // zero and subnormals: frac · 2^-14 · 2^-10
  if (exp === 0x1f) return frac === 0 ? sign * Infinity : NaN;
  return sign * (1 + frac / 1024) * 2 ** (exp - 15);
}

/** number → binary16 bits, rounding to nearest, ties to even; overflow goes to ±Infinity. */
export function numberToF16Bits(x: number): number {
  f32Scratch[0] = x; // round to binary32 first, then from its bits to binary16
  const f = u32Scratch[0]!;
  const sign = (f >>> 16) & 0x8000;
  const exp = (f >>> 23) & 0xff;
  const frac = f & 0x7fffff;
  if (exp === 0xff) return sign | 0x7c00 | (frac ? 0x200 : 0); // Infinity, or a quiet NaN
  const e = exp - 127 + 15; // the exponent rebiased for binary16
  if (e >= 0x1f) return sign | 0x7c00; // too large: Infinity
  if (e <= 0) {
    // a binary16 subnormal (or zero): shift the significand with its implicit 1 into place
    if (e < -10) return sign; // below half the smallest subnormal: ±0
    const m = frac | 0x800000;
    const shift = 14 - e; // 24-bit significand → 10-bit fraction at exponent −14
    const half = 1 << (shift - 1);
    const rest = m & ((1 << shift) - 1);
    let out = m >>> shift;
    if (rest > half || (rest === half && out & 1)) out++; // a carry into the exponent is correct
    return sign | out;
  }
  let out = (e << 10) | (frac >>> 13);
  const rest = frac & 0x1fff;
  if (rest > 0x1000 || (rest === 0x1000 && out & 1)) out++; // carry may reach 0x7c00 = Infinity
  return sign | out;
}

/** bfloat16 bits → number (exact). */
export function bf16BitsToNumber(b: number): number {
  u32Scratch[0] = (b & 0xffff) << 16;
  return f32Scratch[0]!;
}

/** number → bfloat16 bits, rounding to nearest, ties to even; NaN stays NaN. */
export function numberToBf16Bits(x: number): number {
  f32Scratch[0] = x;
  const f = u32Scratch[0]!;
  if ((f & 0x7f800000) === 0x7f800000 && f & 0x7fffff) return ((f >>> 16) | 0x40) & 0xffff; // quiet NaN
  const rounded = f + 0x7fff + ((f >>> 16) & 1);
  return (rounded >>> 16) & 0xffff;
}

export function f16ToF32Array(h: Uint16Array | Int16Array): Float32Array {
  const out = new Float32Array(h.length);
  for (let i = 0; i < h.length; i++) out[i] = f16BitsToNumber(h[i]! & 0xffff);
  return out;
}

export function f32ToF16Array(x: Float32Array): Uint16Array {
  const out = new Uint16Array(x.length);
  for (let i = 0; i < x.length; i++) out[i] = numberToF16Bits(x[i]!);
  return out;
}

export function bf16ToF32Array(b: Uint16Array | Int16Array): Float32Array {
  const out = new Float32Array(b.length);
  const bits = new Uint32Array(out.buffer);
  for (let i = 0; i < b.length; i++) bits[i] = (b[i]! & 0xffff) << 16;
  return out;
}

export function f32ToBf16Array(x: Float32Array): Uint16Array {
  const out = new Uint16Array(x.length);
  for (let i = 0; i < x.length; i++) out[i] = numberToBf16Bits(x[i]!);
  return out;
}
