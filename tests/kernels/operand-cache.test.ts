// The copies pool's operand cache (src/kernels/operand-cache.ts), by itself: where a job's
// operands go in the ring, which inputs count as held, and that a copy is never handed
// out after something else was placed over it. Every expected address is worked out by
// hand from the rules in the file's header (64-byte alignment, blocks in order, back to
// the start when a block does not fit).
import { describe, expect, it } from 'vitest';
import { OperandCache, type Operand } from '../../src/kernels/operand-cache.js';

const op = (bytes: number): Operand => ({ key: {}, bytes });

describe('OperandCache', () => {
  it('lays misses, outputs and scratch out in order, and a held input costs nothing', () => {
    const cache = new OperandCache(1000, 4096);
    const [a, b, c] = [op(100), op(64), op(200)];
    const first = cache.place([a, b, a], [c], 10);
    expect(first.misses).toEqual([a, b]); // a once
    expect([first.addr.get(a.key), first.addr.get(b.key), first.addr.get(c.key), first.scratch]).toEqual([1000, 1128, 1192, 1448]);
    expect(first.end).toBe(1512);
    cache.commit([c], first);
    const d = op(64);
    const second = cache.place([c, a], [d], 0);
    expect(second.misses).toEqual([]);
    expect(second.addr.get(c.key)).toBe(1192);
    expect(second.addr.get(a.key)).toBe(1000);
    expect(second.addr.get(d.key)).toBe(1512);
    expect(second.scratch).toBe(0);
    expect(cache.counts).toEqual({ hitBytes: 300, missBytes: 164 });
  });

  it('an output joins only when committed', () => {
    const cache = new OperandCache(0, 4096);
    const [a, out] = [op(64), op(64)];
    cache.place([a], [out], 0); // never committed: the job failed
    expect(cache.missingBytes([out, a])).toBe(64);
  });

  it('wraps to the start and drops what the new block covers; a held input under the block is copied again', () => {
    const cache = new OperandCache(0, 1024);
    const [a, b, c] = [op(512), op(256), op(256)];
    cache.place([a], [], 0); // a at 0..512
    cache.place([b], [], 0); // b at 512..768
    const third = cache.place([c, a], [], 0); // c fits exactly at 768..1024
    expect(third.addr.get(c.key)).toBe(768);
    expect(third.misses).toEqual([c]);
    // next: 256 bytes do not fit after 1024 → back to 0, over a (its first half)
    const d = op(256);
    const fourth = cache.place([d, b], [], 0);
    expect(fourth.addr.get(d.key)).toBe(0);
    expect(cache.missingBytes([a])).toBe(512); // a was overwritten
    expect(cache.missingBytes([b, c])).toBe(0);
    // a block that would cover a held input it reads: that input is placed anew instead
    const e = op(64);
    const fifth = cache.place([e, b], [], 0); // e at 256; b (512..768) is clear of it
    expect(fifth.misses).toEqual([e]);
    const f = op(320);
    const sixth = cache.place([f, b], [], 0); // f at 320..640 would cover b (512..768): both placed anew
    expect(sixth.misses.map((m) => m.bytes)).toEqual([320, 256]);
    expect(sixth.addr.get(f.key)).toBe(320); // the block grew to 576 bytes, still fits at the head
    expect(sixth.addr.get(b.key)).toBe(640);
    // b is held again, at its new place
    expect(cache.missingBytes([b])).toBe(0);
  });

  it('a job larger than the ring clears it and runs from its start', () => {
    const cache = new OperandCache(100, 1024);
    const a = op(64);
    cache.place([a], [], 0);
    const big = op(2000);
    const p = cache.place([a, big], [], 0);
    expect(p.misses).toEqual([a, big]);
    expect(p.addr.get(a.key)).toBe(100);
    expect(p.addr.get(big.key)).toBe(164);
    expect(p.end).toBe(2212); // 164 + 2000 rounded up to 2048
    expect(cache.missingBytes([a])).toBe(64);
  });
});
