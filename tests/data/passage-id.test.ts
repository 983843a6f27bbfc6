import { describe, expect, it } from 'vitest';
import { contextPassageId, fnv1a64, squadPassageId } from '../../src/data/passage-id.js';
import { mulberry32 } from '../../src/data/random.js';

/** FNV-1a 64 straight from its definition (Fowler–Noll–Vo), with BigInt arithmetic. */
function fnvReference(text: string): string {
  let h = 0xcbf29ce484222325n;
  for (let i = 0; i < text.length; i++) {
    h ^= BigInt(text.charCodeAt(i));
    h = (h * 0x100000001b3n) & 0xffffffffffffffffn;
  }
  return h.toString(16).padStart(16, '0');
}

describe('fnv1a64', () => {
  it('matches the published FNV-1a 64 test vectors (from memory)', () => {
    expect(fnv1a64('')).toBe('cbf29ce484222325');
    expect(fnv1a64('a')).toBe('af63dc4c8601ec8c');
    expect(fnv1a64('foobar')).toBe('85944171f73967e8');
  });

  it('matches the BigInt definition on random UTF-16 strings', () => {
    const random = mulberry32(3);
    for (let t = 0; t < 300; t++) {
      const s = String.fromCharCode(...Array.from({ length: Math.floor(random() * 40) }, () => Math.floor(random() * 0x10000)));
      expect(fnv1a64(s)).toBe(fnvReference(s));
    }
  });
});

describe('passage ids', () => {
  it('SQuAD: title and paragraph index; shared titles add the article index; no title', () => {
    expect(squadPassageId('Harbour', 3, 2, false)).toBe('Harbour/p2');
    expect(squadPassageId('Harbour', 3, 2, true)).toBe('Harbour~3/p2');
    expect(squadPassageId('', 3, 0, false)).toBe('article3/p0');
    expect(squadPassageId(undefined, 1, 4, true)).toBe('article1/p4');
  });

  it('from a context: same text, same id; different text, different id', () => {
    expect(contextPassageId('abc')).toBe(`ctx-${fnvReference('abc')}`);
    expect(contextPassageId('abc')).not.toBe(contextPassageId('abd'));
  });
});
