// The shared training loop on a tiny reader (cpu backend): the fixed order of its
// stages, its typed events, stopping, and resume — a run stopped at update k and
// resumed from its checkpoint takes exactly the updates of an uninterrupted run.
import * as tf from '@tensorflow/tfjs';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import type { NamedTensors } from '../../src/io/tensors.js';
import { ReaderParams } from '../../src/model/params.js';
import type { AdamWState } from '../../src/train/adamw.js';
import { trainConfig, type TrainConfig } from '../../src/train/config.js';
import { trainLoop, type CheckpointRequest, type LoopEvent, type RunState, type TrainTask } from '../../src/train/loop.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';
import { CLS, MASK, SEP, TINY, tinyFeatures, tinySequences } from './tiny.js';

beforeAll(async () => {
  await tf.setBackend('cpu');
});

const owned: { dispose(): void }[] = [];
afterEach(() => {
  while (owned.length > 0) owned.pop()!.dispose();
});

// 10 features, b = 2, A = 2: U = 3 updates per epoch (4 + 4 + 2 features), 2 epochs, S = 6
const FEATURES = tinyFeatures(10, 21);
const SETTINGS: Partial<TrainConfig> = {
  batchSize: 2,
  gradAccumulation: 2,
  epochs: 2,
  maxLength: 16,
  stride: 4,
  learningRate: 1e-3,
  warmupRatio: 0.2,
  seed: 9,
};

function fresh(overrides: Partial<TrainConfig> = {}, weights?: NamedTensors) {
  const config = trainConfig({ ...SETTINGS, ...overrides });
  const params = weights === undefined ? ReaderParams.init(TINY, 3) : ReaderParams.fromNamed(TINY, weights).params;
  const trainer = new Trainer(params, TINY, config, planTraining(config, FEATURES.length));
  owned.push(params, trainer);
  return trainer;
}

const noWait = () => Promise.resolve();
const losses = (events: LoopEvent[]) => events.flatMap((e) => (e.type === 'progress' ? [e.loss] : []));

describe('trainLoop', () => {
  it('runs the plan in order: evaluation then checkpoint at each epoch end, progress after every update', async () => {
    const trainer = fresh();
    const log: string[] = [];
    const events: LoopEvent[] = [];
    const outcome = await trainLoop(
      trainer,
      { kind: 'span', features: FEATURES },
      {
        evaluate: (update) => {
          log.push(`eval@${update}`);
          return { em: update };
        },
        saveCheckpoint: (request) => {
          log.push(`save:${request.reason}@${request.state.trainer.update}:${JSON.stringify(request.metrics)}`);
        },
        onEvent: (event) => {
          events.push(event);
          if (event.type === 'progress') log.push(`step→${event.update}`);
        },
        yieldToEvents: noWait,
      },
    );
    expect(log).toEqual([
      'step→1',
      'step→2',
      'step→3',
      'eval@3',
      'save:interval@3:{"em":3}',
      'step→4',
      'step→5',
      'step→6',
      'eval@6',
      'save:end@6:{"em":6}',
    ]);
    expect(outcome.status).toBe('finished');
    expect(outcome.state).toEqual({ trainer: { update: 6, seed: 9 }, order: { epoch: 2, index: 0 }, totalUpdates: 6, features: 10 });
    expect(events[0]).toMatchObject({ type: 'start', startUpdate: 0 });
    const progress = events.filter((e) => e.type === 'progress');
    expect(progress.map((e) => e.epoch)).toEqual([0, 0, 0, 1, 1, 1]);
    // W = round(0.2 · 6) = 1: lr 0, then 1e-3·(6 − k)/5
    expect(progress.map((e) => e.lr)).toEqual([0, 1, 2, 3, 4, 5].map((k) => trainer.learningRate(k)));
    expect(progress[1].lr).toBeCloseTo(1e-3, 12);
    expect(progress[5].lr).toBeCloseTo(2e-4, 12);
    expect(progress[5].etaMs).toBe(0);
    for (const e of progress) expect(e.tokensPerSecond).toBeGreaterThan(0);
  });

  it('honours evalEvery and checkpointEvery counted in updates', async () => {
    const log: string[] = [];
    await trainLoop(
      fresh({ evalEvery: 2, checkpointEvery: 4 }),
      { kind: 'span', features: FEATURES },
      {
        evaluate: (update) => {
          log.push(`eval@${update}`);
          return {};
        },
        saveCheckpoint: (r) => {
          log.push(`${r.reason}@${r.state.trainer.update}`);
        },
        yieldToEvents: noWait,
      },
    );
    expect(log).toEqual(['eval@2', 'eval@4', 'interval@4', 'eval@6', 'end@6']);
  });

  it('stopped at update k and resumed from its checkpoint, repeats the uninterrupted run step for step', async () => {
    const task: TrainTask = { kind: 'span', features: FEATURES };
    const straightEvents: LoopEvent[] = [];
    const straight = fresh();
    await trainLoop(straight, task, { onEvent: (e) => straightEvents.push(e), yieldToEvents: noWait });
    const expected = losses(straightEvents);
    expect(expected).toHaveLength(6);

    for (const k of [1, 3, 4]) {
      // stop after k updates; keep the checkpoint the loop hands out, as a store would
      let saved: { state: RunState; weights: NamedTensors; optimizer: AdamWState } | null = null;
      const firstEvents: LoopEvent[] = [];
      const first = fresh();
      const stopped = await trainLoop(first, task, {
        onEvent: (e) => firstEvents.push(e),
        shouldStop: () => first.updatesDone >= k,
        saveCheckpoint: (r: CheckpointRequest) => {
          if (r.reason === 'stop') saved = { state: structuredClone(r.state), weights: r.weights(), optimizer: r.optimizer() };
        },
        yieldToEvents: noWait,
      });
      expect(stopped.status).toBe('stopped');
      expect(saved).not.toBeNull();
      const checkpoint = saved!;
      expect(checkpoint.state.trainer.update).toBe(k);

      // a new process: weights from the checkpoint, trainer restored, loop resumed
      const resumed = fresh({}, checkpoint.weights);
      resumed.restore(checkpoint.state.trainer, checkpoint.optimizer);
      const resumedEvents: LoopEvent[] = [];
      const outcome = await trainLoop(resumed, task, { onEvent: (e) => resumedEvents.push(e), yieldToEvents: noWait }, checkpoint.state);
      expect(outcome.status).toBe('finished');
      expect([...losses(firstEvents), ...losses(resumedEvents)]).toEqual(expected);
      expect(resumedEvents[0]).toMatchObject({ type: 'start', startUpdate: k });
    }
  });

  it('resumed from an interval checkpoint, saves no second checkpoint of the update it starts from', async () => {
    const task: TrainTask = { kind: 'span', features: FEATURES };
    let saved: { state: RunState; weights: NamedTensors; optimizer: AdamWState } | null = null;
    const first = fresh({ checkpointEvery: 2 });
    await trainLoop(first, task, {
      shouldStop: () => first.updatesDone >= 3,
      saveCheckpoint: (r: CheckpointRequest) => {
        if (r.reason === 'interval' && r.state.trainer.update === 2)
          saved = { state: structuredClone(r.state), weights: r.weights(), optimizer: r.optimizer() };
      },
      yieldToEvents: noWait,
    });
    const checkpoint = saved!;
    const resumed = fresh({ checkpointEvery: 2 }, checkpoint.weights);
    resumed.restore(checkpoint.state.trainer, checkpoint.optimizer);
    const savedAt: number[] = [];
    await trainLoop(
      resumed,
      task,
      { saveCheckpoint: (r: CheckpointRequest) => void savedAt.push(r.state.trainer.update), yieldToEvents: noWait },
      checkpoint.state,
    );
    // due at 2 (where it resumed: not again) and 4, then the end at 6
    expect(savedAt).toEqual([4, 6]);
  });

  it('resumed from the end checkpoint of a finished run, takes no update and saves nothing', async () => {
    const task: TrainTask = { kind: 'span', features: FEATURES };
    let saved: { state: RunState; weights: NamedTensors; optimizer: AdamWState } | null = null;
    const first = fresh();
    await trainLoop(first, task, {
      saveCheckpoint: (r: CheckpointRequest) => {
        if (r.reason === 'end') saved = { state: structuredClone(r.state), weights: r.weights(), optimizer: r.optimizer() };
      },
      yieldToEvents: noWait,
    });
    const checkpoint = saved!;
    expect(checkpoint.state.trainer.update).toBe(6);
    const resumed = fresh({}, checkpoint.weights);
    resumed.restore(checkpoint.state.trainer, checkpoint.optimizer);
    const savedAt: number[] = [];
    const events: LoopEvent[] = [];
    const outcome = await trainLoop(
      resumed,
      task,
      {
        saveCheckpoint: (r: CheckpointRequest) => void savedAt.push(r.state.trainer.update),
        onEvent: (e) => events.push(e),
        yieldToEvents: noWait,
      },
      checkpoint.state,
    );
    expect(outcome.status).toBe('finished');
    expect(losses(events)).toEqual([]);
    expect(savedAt).toEqual([]);
  });

  it('stops on an aborted signal', async () => {
    const controller = new AbortController();
    const trainer = fresh();
    const outcome = await trainLoop(
      trainer,
      { kind: 'span', features: FEATURES },
      {
        signal: controller.signal,
        onEvent: (e) => {
          if (e.type === 'progress' && e.update === 2) controller.abort();
        },
        yieldToEvents: noWait,
      },
    );
    expect(outcome).toMatchObject({ status: 'stopped', state: { trainer: { update: 2 }, order: { epoch: 0, index: 8 } } });
  });

  it('refuses to resume a run planned over other data, or a trainer not restored', async () => {
    const trainer = fresh();
    const state: RunState = { trainer: { update: 2, seed: 9 }, order: { epoch: 0, index: 8 }, totalUpdates: 6, features: 10 };
    await expect(trainLoop(trainer, { kind: 'span', features: FEATURES }, {}, { ...state, features: 12 })).rejects.toThrow(
      /planned 6 updates over 12 features/,
    );
    await expect(trainLoop(trainer, { kind: 'span', features: FEATURES }, {}, state)).rejects.toThrow(/call trainer.restore first/);
  });

  it('pretrains with the MLM task through the same loop, repeatably', async () => {
    const task: TrainTask = {
      kind: 'mlm',
      sequences: tinySequences(10, 4),
      masking: { maskId: MASK, vocabSize: TINY.vocabSize, specialIds: [0, CLS, SEP] },
    };
    const run = async () => {
      const events: LoopEvent[] = [];
      await trainLoop(fresh(), task, { onEvent: (e) => events.push(e), yieldToEvents: noWait });
      return losses(events);
    };
    const first = await run();
    expect(first).toHaveLength(6);
    expect(await run()).toEqual(first);
  });
});

describe('trainLoop on a time budget', () => {
  // a fake clock: every update takes 100 ms of training time, each evaluation 1 s that must not count
  function clock() {
    let t = 0;
    return { now: () => t, advance: (ms: number) => (t += ms) };
  }

  it('warms up and decays on training time and ends when its share of the budget is spent', async () => {
    const trainer = fresh({ epochs: 50 });
    const c = clock();
    const events: LoopEvent[] = [];
    const budget = { totalMs: 1000, fromMs: 0, untilMs: 600, warmupShare: 0.1, evalEveryMs: 250 };
    const outcome = await trainLoop(
      trainer,
      { kind: 'span', features: FEATURES },
      {
        evaluate: () => {
          c.advance(1000);
          return { f1: 0 };
        },
        onEvent: (e) => {
          events.push(e);
          if (e.type === 'progress') c.advance(100);
        },
        now: c.now,
        yieldToEvents: noWait,
      },
      undefined,
      budget,
    );
    const progress = events.filter((e) => e.type === 'progress');
    // 6 updates of 100 ms fill 600 ms; the evaluations' 1 s each is paused out of the clock
    expect(progress).toHaveLength(6);
    expect(outcome.status).toBe('finished');
    expect(outcome.state.trainingMs).toBe(600);
    // the rate at 0, 100, … 500 ms of a 1 000 ms schedule with 10% warmup: 0, then (1 − f)/0.9 of the peak
    const peak = SETTINGS.learningRate!;
    const expected = [0, 0.9, 0.8, 0.7, 0.6, 0.5].map((f, i) => (i === 0 ? 0 : (peak * f) / 0.9));
    progress.forEach((e, i) => expect(e.lr).toBeCloseTo(expected[i]!, 12));
    // an evaluation once 250 ms of training time had passed since the start (at 300 ms), and one at the end
    expect(events.filter((e) => e.type === 'evaluated').map((e) => e.update)).toEqual([3, 6]);
  });

  it('resumes on the saved clock: a stopped phase continues from its training time', async () => {
    const c = clock();
    const budget = { totalMs: 1000, fromMs: 0, untilMs: 1000, warmupShare: 0 };
    let saved: RunState | null = null;
    let stopAfter = 3;
    const first = fresh({ epochs: 50 });
    const stopped = await trainLoop(
      first,
      { kind: 'span', features: FEATURES },
      {
        saveCheckpoint: (r) => void (saved = r.state),
        onEvent: (e) => e.type === 'progress' && c.advance(100),
        shouldStop: () => --stopAfter <= 0,
        now: c.now,
        yieldToEvents: noWait,
      },
      undefined,
      budget,
    );
    expect(stopped.status).toBe('stopped');
    expect(saved!.trainingMs).toBe(300);
    const lrs: number[] = [];
    const second = fresh({ epochs: 50 }, first.params.toNamed());
    second.restore(saved!.trainer, first.optimizerState());
    await trainLoop(
      second,
      { kind: 'span', features: FEATURES },
      { onEvent: (e) => e.type === 'progress' && (lrs.push(e.lr), c.advance(100)), now: c.now, yieldToEvents: noWait },
      saved!,
      budget,
    );
    // 7 more updates fill the budget's 1 000 ms; the first of them at 300 ms: lr = peak · 0.7
    expect(lrs).toHaveLength(7);
    expect(lrs[0]).toBeCloseTo(SETTINGS.learningRate! * 0.7, 12);
  });
});
