// Progressive stacking of the base recipe (tiny-models/recipe/stack-layers.ts; the method of
// Gong et al. 2019): the shipped base's layers copied onto themselves give a reader of
// twice the depth that loads through the engine's own checkpoint reader, with every layer
// L + i equal to layer i and every other weight unchanged.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadCheckpointDir } from '../../src/io/checkpoint-dir.js';
import { namedToSafetensors, readSafetensors } from '../../src/io/safetensors.js';
import { stackLayers } from '../../tiny-models/recipe/stack-layers.js';

const BASE = join('tiny-models', 'base');

describe('stackLayers', () => {
  const config = JSON.parse(readFileSync(join(BASE, 'config.json'), 'utf8')) as { num_hidden_layers: number };
  const { tensors } = readSafetensors(new Uint8Array(readFileSync(join(BASE, 'model.safetensors'))));
  const layers = config.num_hidden_layers;

  it('copies layer i to layer L + i and keeps every other tensor', () => {
    const stacked = stackLayers(tensors, layers);
    const perLayer = [...tensors.keys()].filter((n) => /\blayer\.0\./.test(n));
    expect(perLayer.length).toBeGreaterThan(0);
    expect(stacked.size).toBe(tensors.size + perLayer.length * layers);
    for (const [name, t] of tensors) {
      expect(stacked.get(name)!.data).toEqual(t.data);
      const m = /^(.*\blayer\.)(\d+)(\..+)$/.exec(name);
      if (m === null) continue;
      const copy = stacked.get(`${m[1]}${Number(m[2]) + layers}${m[3]}`)!;
      expect(copy.shape).toEqual(t.shape);
      expect(copy.data).toEqual(t.data);
      expect(copy.data).not.toBe(t.data); // a copy, so training one layer leaves its twin
    }
  });

  it('gives a folder the engine loads as a reader of twice the depth', () => {
    const stacked = stackLayers(tensors, layers);
    const configJson = JSON.stringify({ ...config, num_hidden_layers: 2 * layers });
    const { config: loaded, params } = loadCheckpointDir(
      {
        configJson,
        safetensors: namedToSafetensors(stacked),
        vocab: { file: 'vocab.txt', text: readFileSync(join(BASE, 'vocab.txt'), 'utf8') },
        names: { config: 'config.json', weights: 'model.safetensors', vocab: 'vocab.txt' },
      },
      { seed: 1 },
    );
    expect(loaded.numLayers).toBe(2 * layers);
    params.dispose();
  });

  it('refuses weights that do not match the layer count', () => {
    expect(() => stackLayers(tensors, layers - 1)).toThrow(/belongs to layer/);
    expect(() => stackLayers(tensors, layers + 1)).toThrow(/no tensor of layer/);
  });
});
