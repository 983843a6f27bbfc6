// The kernels the engine loads are the base64 copies in src/kernels/wasm-binary.ts; the
// .wasm files beside kernels.c (four builds) are what build.sh compiled. They must be the same bytes, and
// the sha256 lines in the generated file must name them, or a rebuilt kernel would be
// committed without the engine ever running it.
import { createHash } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import {
  KERNELS_RELAXED_WASM_BASE64,
  KERNELS_SHARED_RELAXED_WASM_BASE64,
  KERNELS_SHARED_WASM_BASE64,
  KERNELS_WASM_BASE64,
} from '../../src/kernels/wasm-binary.js';

const dir = join(import.meta.dirname, '..', '..', 'src', 'kernels');
const generated = readFileSync(join(dir, 'wasm-binary.ts'), 'utf8');

describe('committed kernel binaries', () => {
  for (const [file, base64] of [
    ['kernels.wasm', KERNELS_WASM_BASE64],
    ['kernels-shared.wasm', KERNELS_SHARED_WASM_BASE64],
    ['kernels-relaxed.wasm', KERNELS_RELAXED_WASM_BASE64],
    ['kernels-shared-relaxed.wasm', KERNELS_SHARED_RELAXED_WASM_BASE64],
  ] as const) {
    it(`${file} equals its base64 copy, and its sha256 is the one recorded`, () => {
      const bytes = readFileSync(join(dir, 'wasm', file));
      expect(Buffer.from(base64, 'base64').equals(bytes)).toBe(true);
      const sha = createHash('sha256').update(bytes).digest('hex');
      expect(generated).toMatch(new RegExp(`^// sha256 ${file.replace('.', '\\.')} +${sha}$`, 'm'));
    });
  }
});
