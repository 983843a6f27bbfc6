// Three full-model training updates against PyTorch. The expected values come from
// PyTorch 1.13 (Debian python3-torch): torch.optim.AdamW (β = (0.9, 0.999), ε = 1e-6,
// λ = 0.01 except biases and LayerNorm), LambdaLR with DEVELOPERS.md's warmup/decay
// (S = 3, W = 1, base 1e-3) and torch.nn.utils.clip_grad_norm_ (max 1.0), on the span
// loss of one fixed batch, dropout 0, in float64 — tests/reference/generate_fixtures.py,
// fixture tests/reference/fixtures/adamw.json (weights and inputs from model.json).
// The engine runs the same updates in float32 from the same float32-exact weights.
//
// Tolerance. Per-update loss and grad norm: 1e-4 relative (float32 rounding of O(1)
// values); lr to 12 digits. Parameters after 3 updates: |ours − theirs| ≤ 2e-5 +
// 1e-4·|theirs|. The weights move by at most Σ lr = 1.5e-3. Some gradients are exactly
// 0 in theory and pure rounding noise in practice — the key biases and qa_outputs.bias
// (softmax ignores a constant added to every logit) — and Adam turns noise g into a
// step lr·g/(|g| + ε) of up to ~1e-5 in float32 where float64 leaves ~0. Measured worst
// differences: 8.0e-6 (cpu) and 1.1e-5 (wasm), both qa_outputs.bias; every other tensor
// is within 5.6e-6. The bound is still 75× smaller than one full update step.
// (Weight decay moves these weights by only ~lr·λ·|p| ≈ 2e-7 here, below that noise;
// tests/train/adamw.test.ts checks the decay in closed form instead.)
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ReaderConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { collateSpan, type SpanExample } from '../../src/train/batches.js';
import { trainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer, type StepResult } from '../../src/train/trainer.js';
import { useBackend, type BackendName } from '../helpers/backend.js';
import { compareValues, loadFixture, namedFromJson, type JsonTensor } from '../model/fixtures.js';

interface ModelFixture {
  config: ReaderConfig;
  inputs: {
    input_ids: number[][];
    token_type_ids: number[][];
    attention_mask: number[][];
    start_positions: number[];
    end_positions: number[];
  };
  weights: Record<string, JsonTensor>;
}
interface AdamWFixture {
  settings: {
    base_lr: number;
    betas: [number, number];
    eps: number;
    weight_decay: number;
    total_updates: number;
    warmup_updates: number;
    max_grad_norm: number;
  };
  steps: { update: number; lr: number; loss: number; grad_norm: number; clipped: boolean }[];
  params_after: Record<string, JsonTensor>;
}

const model = loadFixture<ModelFixture>('model.json');
const adamw = loadFixture<AdamWFixture>('adamw.json');
const PARAMS = { atol: 2e-5, rtol: 1e-4 };

const examples: SpanExample[] = model.inputs.input_ids.map((ids, b) => ({
  inputIds: Int32Array.from(ids),
  tokenTypeIds: Int32Array.from(model.inputs.token_type_ids[b]),
  attentionMask: Int32Array.from(model.inputs.attention_mask[b]),
  startPosition: model.inputs.start_positions[b],
  endPosition: model.inputs.end_positions[b],
}));

for (const backend of ['cpu', 'wasm'] as BackendName[]) {
  describe(`3 AdamW updates of the whole reader vs torch.optim.AdamW (PyTorch, adamw.json) on ${backend}`, () => {
    let params: ReaderParams;
    let trainer: Trainer;
    const results: StepResult[] = [];

    beforeAll(async () => {
      await useBackend(backend);
      const { settings } = adamw;
      const B = examples.length;
      // one feature set of B, one micro-batch per update, S = 3 epochs of 1 update, W = round(S/3) = 1
      const config = trainConfig({
        learningRate: settings.base_lr,
        beta1: settings.betas[0],
        beta2: settings.betas[1],
        epsilon: settings.eps,
        weightDecay: settings.weight_decay,
        maxGradNorm: settings.max_grad_norm,
        batchSize: B,
        gradAccumulation: 1,
        epochs: settings.total_updates,
        warmupRatio: settings.warmup_updates / settings.total_updates,
        dropout: 0,
        trimPadding: false,
        maxLength: examples[0].inputIds.length,
        stride: 1,
      });
      const plan = planTraining(config, B);
      expect(plan.totalUpdates).toBe(settings.total_updates);
      expect(plan.warmupUpdates).toBe(settings.warmup_updates);
      params = ReaderParams.fromNamed(model.config, namedFromJson(model.weights)).params;
      trainer = new Trainer(params, model.config, config, plan);
      const batch = collateSpan(examples, false);
      for (let k = 0; k < settings.total_updates; k++) results.push(trainer.step([batch]));
    });

    afterAll(() => {
      trainer.dispose();
      params.dispose();
    });

    it('takes each update at PyTorch’s learning rate, loss and gradient norm, clipping when it does', () => {
      adamw.steps.forEach((want, k) => {
        const got = results[k];
        expect(got.lr, `update ${k} lr`).toBeCloseTo(want.lr, 12);
        expect(Math.abs(got.loss - want.loss), `update ${k} loss ${got.loss} vs ${want.loss}`).toBeLessThan(1e-4 * Math.abs(want.loss));
        expect(Math.abs(got.gradNorm - want.grad_norm), `update ${k} norm ${got.gradNorm} vs ${want.grad_norm}`).toBeLessThan(
          1e-4 * want.grad_norm,
        );
        expect(got.clipScale < 1, `update ${k} clipped`).toBe(want.clipped);
      });
    });

    it('ends with every parameter where PyTorch’s do', () => {
      const ours = params.toNamed();
      const problems: string[] = [];
      for (const [name, theirs] of Object.entries(adamw.params_after)) {
        const mine = ours.get(name);
        if (mine === undefined) {
          problems.push(`${name}: missing from the engine`);
          continue;
        }
        expect(mine.shape, name).toEqual(theirs.shape);
        const problem = compareValues(name, mine.data, theirs.data, PARAMS);
        if (problem !== null) problems.push(problem);
      }
      expect(problems, problems.slice(0, 3).join('\n')).toEqual([]);
      expect(ours.size).toBe(Object.keys(adamw.params_after).length);
    });

    it('moved the weights: the fixture is not the starting point', () => {
      // guards the check above against a trainer that never updates
      const start = model.weights['bert.encoder.layer.0.attention.self.query.weight'].data;
      const after = params.toNamed().get('bert.encoder.layer.0.attention.self.query.weight')!.data;
      expect(compareValues('query.weight', after, start, { atol: 1e-5, rtol: 0 })).not.toBeNull();
    });
  });
}
