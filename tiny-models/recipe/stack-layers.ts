// defines: stackLayers — a deeper base from a trained one by progressive stacking (Gong et
// al. 2019, "Efficient Training of BERT by Progressively Stacking"): the L trained encoder
// layers copied onto themselves as layers L … 2L−1, every other weight kept, so a 2L-layer
// reader starts from what the L-layer one learnt instead of from random weights. The
// result is meant to be trained again (the reading stage, reading-stage.ts): stacked, the
// layers compute another function than before.
//
//   npx tsx tiny-models/recipe/stack-layers.ts --from DIR --out DIR
//
// writes config.json (num_hidden_layers doubled), model.safetensors (fp32), vocab.txt and
// the source's stage facts (pretraining.json and the stage files beside it), with
// stacking.json saying what was done.
//
// Measured (DEVELOPERS.md, "Facts found while building"): the shipped L2 base stacked to
// 4 layers and given 884 reading-stage updates scored demo F1 37.0 and 32.2 (seeds 1, 2)
// after `npm run demo`, against 33.3 and 35.0 for the shipped base: no gain beyond the
// seeds' spread yet, so not shipped.
import { copyFileSync, existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { namedToSafetensors, readSafetensors } from '../../src/io/safetensors.js';
import type { NamedTensors } from '../../src/io/tensors.js';

const LAYER = /^(.*\blayer\.)(\d+)(\..+)$/;

/** The tensors of a 2L-layer encoder whose layers L + i are copies of layers i (the rest unchanged). */
export function stackLayers(tensors: NamedTensors, layers: number): NamedTensors {
  if (!Number.isInteger(layers) || layers < 1) throw new Error(`stackLayers: expected a positive layer count, got ${layers}`);
  const out: NamedTensors = new Map();
  const seen = new Set<number>();
  for (const [name, t] of tensors) {
    const m = LAYER.exec(name);
    if (m === null) {
      out.set(name, t);
      continue;
    }
    const i = Number(m[2]);
    if (i >= layers) throw new Error(`stackLayers: tensor "${name}" belongs to layer ${i}, but the config has ${layers} layers`);
    seen.add(i);
    out.set(name, t);
    out.set(`${m[1]}${i + layers}${m[3]}`, { shape: [...t.shape], data: new Float32Array(t.data) });
  }
  for (let i = 0; i < layers; i++)
    if (!seen.has(i)) throw new Error(`stackLayers: no tensor of layer ${i} (the config has ${layers} layers)`);
  return out;
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  const args = new Map<string, string>();
  for (let i = 2; i < process.argv.length; i += 2) {
    const flag = process.argv[i]!;
    if (!['--from', '--out'].includes(flag)) throw new Error(`unknown flag ${flag} (known: --from, --out)`);
    if (process.argv[i + 1] === undefined) throw new Error(`${flag} needs a value`);
    args.set(flag.slice(2), process.argv[i + 1]!);
  }
  const from = args.get('from') ?? 'tiny-models/base';
  const out = args.get('out');
  if (out === undefined) throw new Error('--out DIR is needed (the folder to write the stacked base into)');
  const config = JSON.parse(readFileSync(join(from, 'config.json'), 'utf8')) as Record<string, unknown>;
  const layers = config.num_hidden_layers;
  if (typeof layers !== 'number') throw new Error(`${join(from, 'config.json')}: field num_hidden_layers: expected a number`);
  const { tensors } = readSafetensors(new Uint8Array(readFileSync(join(from, 'model.safetensors'))), join(from, 'model.safetensors'));
  const stacked = stackLayers(tensors, layers);
  mkdirSync(out, { recursive: true });
  writeFileSync(join(out, 'config.json'), `${JSON.stringify({ ...config, num_hidden_layers: 2 * layers }, null, 2)}\n`);
  writeFileSync(join(out, 'model.safetensors'), namedToSafetensors(stacked));
  copyFileSync(join(from, 'vocab.txt'), join(out, 'vocab.txt'));
  for (const f of ['pretraining.json', 'span-pretraining.json', 'reading-stage.json'])
    if (existsSync(join(from, f))) copyFileSync(join(from, f), join(out, f));
  writeFileSync(
    join(out, 'stacking.json'),
    `${JSON.stringify({ method: 'progressive stacking (Gong et al. 2019)', from, layersBefore: layers, layersAfter: 2 * layers }, null, 2)}\n`,
  );
  process.stdout.write(`${from}: ${layers} layers stacked to ${2 * layers}, written to ${out}/\n`);
}
