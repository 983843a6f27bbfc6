// AdamW (Loshchilov & Hutter 2019) in torch.optim.AdamW's update order, as DEVELOPERS.md
// writes it out: p ← p·(1 − lr·λ); m ← β1·m + (1 − β1)·g; v ← β2·v + (1 − β2)·g²;
// p ← p − lr·(m / (1 − β1ᵗ)) / (√(v / (1 − β2ᵗ)) + ε). The expected values are worked by
// hand from those four lines (float64, shown step by step) or follow in closed form.
import * as tf from '@tensorflow/tfjs';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { AdamW, decaysWeight } from '../../src/train/adamw.js';

beforeAll(async () => {
  await tf.setBackend('cpu');
});

const owned: { dispose(): void }[] = [];
afterEach(() => {
  while (owned.length > 0) owned.pop()!.dispose();
});

function variables(values: Record<string, number[]>): Map<string, tf.Variable> {
  const map = new Map<string, tf.Variable>();
  for (const [name, data] of Object.entries(values)) {
    const v = tf.variable(tf.tensor1d(data));
    owned.push(v);
    map.set(name, v);
  }
  return map;
}

function gradients(values: Record<string, number[]>): Map<string, tf.Tensor> {
  return new Map(Object.entries(values).map(([name, data]) => [name, tf.tensor1d(data)]));
}

function applyOnce(opt: AdamW, values: Record<string, number[]>, lr: number, scale = 1): void {
  const grads = gradients(values);
  opt.apply(grads, lr, scale);
  for (const g of grads.values()) g.dispose();
}

const read = (v: tf.Variable) => Array.from(v.dataSync());

describe('decaysWeight (DEVELOPERS.md: λ = 0 for biases and LayerNorm)', () => {
  it('exempts biases and LayerNorm parameters only', () => {
    expect(decaysWeight('bert.encoder.layer.0.attention.self.query.weight')).toBe(true);
    expect(decaysWeight('bert.embeddings.word_embeddings.weight')).toBe(true);
    expect(decaysWeight('bert.encoder.layer.0.attention.self.query.bias')).toBe(false);
    expect(decaysWeight('bert.embeddings.LayerNorm.weight')).toBe(false);
    expect(decaysWeight('bert.encoder.layer.1.output.LayerNorm.bias')).toBe(false);
    expect(decaysWeight('cls.predictions.bias')).toBe(false);
  });
});

describe('AdamW update', () => {
  it('matches three steps worked by hand', () => {
    // p0 = 1, lr = 0.1, λ = 0.01, β = (0.9, 0.999), ε = 1e-6; gradients 0.5, −1, 0.25
    // t=1: p = 1·0.999 = 0.999; m = 0.05; v = 0.00025
    //      step = 0.1/0.1 · 0.05 / (√0.00025/√0.001 + 1e-6) = 0.05/0.500001 = 0.0999998
    //      p = 0.8990002
    // t=2: p = 0.8990002·0.999; m = 0.045 − 0.1 = −0.055; v = 0.00024975 + 0.001 = 0.00124975
    //      step = 0.1/0.19 · (−0.055) / (√0.00124975/√0.001999 + 1e-6) = −0.0366101…
    //      p = 0.9347115062…
    // t=3: m = −0.0495 + 0.025 = −0.0245; v = 0.00124850… + 0.0000625 = 0.00131100025
    //      p = 0.9474458403…
    const params = variables({ w: [1] });
    const opt = new AdamW(params, { weightDecay: 0.01 });
    owned.push(opt);
    const w = params.get('w')!;
    applyOnce(opt, { w: [0.5] }, 0.1);
    expect(read(w)[0]).toBeCloseTo(0.8990002, 6);
    applyOnce(opt, { w: [-1] }, 0.1);
    expect(read(w)[0]).toBeCloseTo(0.9347115062, 6);
    applyOnce(opt, { w: [0.25] }, 0.1);
    expect(read(w)[0]).toBeCloseTo(0.9474458403, 6);
    expect(opt.stepOf('w')).toBe(3);

    const { m, v } = opt.exportState();
    expect(m.get('w')!.data[0]).toBeCloseTo(-0.0245, 7);
    expect(v.get('w')!.data[0]).toBeCloseTo(0.00131100025, 9);
  });

  it('under a constant gradient moves every step by lr·g/(|g| + ε), decayed geometrically', () => {
    // With g fixed, m̂ₜ = g and v̂ₜ = g² for every t, so each step subtracts
    // c = lr·g/(|g| + ε). With decay r = 1 − lr·λ: pₙ = p₀·rⁿ − c·(1 − rⁿ)/(1 − r).
    const lr = 0.01;
    const lambda = 0.1;
    const g = 0.3;
    const n = 50;
    const params = variables({ 'dense.weight': [2, -2], 'dense.bias': [2, -2] });
    const opt = new AdamW(params, { weightDecay: lambda });
    owned.push(opt);
    for (let i = 0; i < n; i++) applyOnce(opt, { 'dense.weight': [g, -g], 'dense.bias': [g, -g] }, lr);

    const c = (lr * g) / (g + 1e-6);
    const r = 1 - lr * lambda;
    const decayed = (p0: number, sign: number) => p0 * r ** n - sign * c * ((1 - r ** n) / (1 - r));
    const weight = read(params.get('dense.weight')!);
    expect(weight[0]).toBeCloseTo(decayed(2, 1), 4);
    expect(weight[1]).toBeCloseTo(decayed(-2, -1), 4);
    // the bias is exempt from decay: a straight line, p₀ ∓ n·c
    const bias = read(params.get('dense.bias')!);
    expect(bias[0]).toBeCloseTo(2 - n * c, 4);
    expect(bias[1]).toBeCloseTo(-2 + n * c, 4);
  });

  it('multiplies the gradient by the clip scale first', () => {
    // g = 4 scaled by 0.25 is g = 1: t=1, λ = 0 gives p = 1 − lr·1/(1 + 1e-6)
    const params = variables({ b: [1] });
    const opt = new AdamW(params, { weightDecay: 0 });
    owned.push(opt);
    applyOnce(opt, { b: [4] }, 0.1, 0.25);
    expect(read(params.get('b')!)[0]).toBeCloseTo(1 - 0.1 / 1.000001, 7);
    expect(opt.exportState().v.get('b')!.data[0]).toBeCloseTo(0.001, 9); // (1 − β2)·1²
  });

  it('skips a parameter without a gradient entirely, as torch skips grad None', () => {
    const params = variables({ 'a.weight': [1], 'b.weight': [1] });
    const opt = new AdamW(params, { weightDecay: 0.5 });
    owned.push(opt);
    applyOnce(opt, { 'a.weight': [1] }, 0.1);
    expect(read(params.get('b.weight')!)).toEqual([1]); // not even decayed
    expect(opt.stepOf('b.weight')).toBe(0);
    expect(opt.stepOf('a.weight')).toBe(1);
  });

  it('rejects a gradient for a parameter it does not own', () => {
    const opt = new AdamW(variables({ a: [1] }));
    owned.push(opt);
    const grads = gradients({ stranger: [1] });
    expect(() => opt.apply(grads, 0.1)).toThrow(/unknown parameter "stranger"/);
    for (const g of grads.values()) g.dispose();
  });

  it('keeps the tensor count flat across updates, and frees its moments on dispose', () => {
    const params = variables({ w: [1, 2, 3] });
    const start = tf.memory().numTensors;
    const opt = new AdamW(params);
    expect(tf.memory().numTensors).toBe(start + 2); // m and v
    for (let i = 0; i < 20; i++) applyOnce(opt, { w: [0.1, -0.2, 0.3] }, 0.01);
    expect(tf.memory().numTensors).toBe(start + 2);
    opt.dispose();
    expect(tf.memory().numTensors).toBe(start);
  });
});

describe('AdamW state export/import', () => {
  it('continues after an import exactly as it would have without the break', () => {
    const grads = [
      [0.5, -0.1],
      [-0.3, 0.2],
      [0.05, 0.4],
      [0.2, -0.6],
    ];
    const straight = variables({ 'x.weight': [1, -1] });
    const optA = new AdamW(straight, { weightDecay: 0.01 });
    owned.push(optA);
    for (const g of grads) applyOnce(optA, { 'x.weight': g }, 0.05);

    const resumed = variables({ 'x.weight': [1, -1] });
    const optB = new AdamW(resumed, { weightDecay: 0.01 });
    owned.push(optB);
    for (const g of grads.slice(0, 2)) applyOnce(optB, { 'x.weight': g }, 0.05);
    const saved = optB.exportState();
    const weights = read(resumed.get('x.weight')!);
    expect([...saved.m.keys()]).toEqual(['x.weight']);
    expect([...saved.v.keys()]).toEqual(['x.weight']);
    expect(saved.step).toEqual({ 'x.weight': 2 });

    const again = variables({ 'x.weight': weights });
    const optC = new AdamW(again, { weightDecay: 0.01 });
    owned.push(optC);
    optC.importState(saved);
    for (const g of grads.slice(2)) applyOnce(optC, { 'x.weight': g }, 0.05);
    expect(read(again.get('x.weight')!)).toEqual(read(straight.get('x.weight')!));
  });

  it('refuses a state with a missing or misshapen tensor, naming it, and changes nothing', () => {
    const params = variables({ w: [1, 2] });
    const opt = new AdamW(params);
    owned.push(opt);
    const good = opt.exportState();
    expect(() => opt.importState({ ...good, v: new Map() })).toThrow(/v\["w"\] is missing/);
    const wrong = new Map(good.m);
    wrong.set('w', { shape: [3], data: new Float32Array(3) });
    expect(() => opt.importState({ ...good, m: wrong })).toThrow(/m\["w"\] has shape \[3\], expected \[2\]/);
    expect(() => opt.importState({ ...good, step: {} })).toThrow(/step\["w"\]/);
    expect(opt.stepOf('w')).toBe(0);
  });
});
