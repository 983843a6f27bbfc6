// defines: trainLoop — the one training loop the CLI and the Web Worker share — with
// its task, hooks, events, run state and outcome types.
//
// Flat and labelled, in a fixed order for every update k = start … S − 1
// (docs/STYLE.md §9, after nanoGPT's train.py):
//
//   1. learning rate    lr(k) from the plan (schedule.ts)
//   2. eval/checkpoint  when due at k (never at the first update of this session, k = 0
//                       or the resumed update): `evaluate`, then `saveCheckpoint`
//   3. step             the update's micro-batches from the seeded order, forward,
//                       backward, clip, AdamW (trainer.ts)
//   4. time and report  a typed 'progress' event: loss, lr, ‖g‖, tokens/s, ETA
//   5. stop?            `signal` aborted or `shouldStop()`: save a 'stop' checkpoint, return
//
// and after the last update a final evaluation and an 'end' checkpoint. The loop never
// knows where checkpoints go or how evaluation is done: both are callbacks. It yields
// to the event loop after every update so a worker can receive a pause message.
//
// Resume: pass the RunState of a checkpoint (and restore the weights and the trainer's
// moments first). Everything random is a function of (seed, epoch, update), so the
// resumed run takes exactly the updates the uninterrupted one would have.

import type { NamedTensors } from '../io/tensors.js';
import type { AdamWState } from './adamw.js';
import {
  collateMlm,
  collateSpan,
  orderAtUpdate,
  UpdateSampler,
  type DataOrder,
  type MlmMasking,
  type SpanExample,
  type TokenExample,
} from './batches.js';
import { seedAt } from './random.js';
import type { TrainPlan } from './schedule.js';
import type { StepResult, Trainer, TrainerState } from './trainer.js';

/** What to train on: span extraction over features, or masked-LM over token sequences. */
export type TrainTask =
  | { kind: 'span'; features: readonly SpanExample[] }
  /** `masking.probability` comes from the train config's `mlmProbability` */
  | { kind: 'mlm'; sequences: readonly TokenExample[]; masking: Omit<MlmMasking, 'probability'> };

/** Where a run stands, as plain data: goes into a checkpoint's meta. */
export interface RunState {
  trainer: TrainerState;
  /** the data position of the next update */
  order: DataOrder;
  /** the plan's size, to refuse resuming with different data or settings */
  totalUpdates: number;
  features: number;
}

/** Plain metrics from the evaluate callback (EM, F1, loss, …). */
export type Metrics = Record<string, number>;

/** Handed to `saveCheckpoint`; the tensors are read only if the callback asks for them. */
export interface CheckpointRequest {
  /** 'interval': due by the config; 'stop': the run was asked to stop; 'end': the run finished */
  reason: 'interval' | 'stop' | 'end';
  state: RunState;
  /** the metrics of the evaluation at this update, when there was one */
  metrics: Metrics | null;
  /** the weights in checkpoint layout (ReaderParams.toNamed) */
  weights(): NamedTensors;
  /** the AdamW moments in checkpoint layout, with step counts */
  optimizer(): AdamWState;
}

/** Typed messages out of the loop; the UI and the CLI render them. */
export type LoopEvent =
  | { type: 'start'; plan: TrainPlan; startUpdate: number }
  | {
      type: 'progress';
      /** updates done, 1 … S */
      update: number;
      totalUpdates: number;
      /** 0-based epoch of this update */
      epoch: number;
      loss: number;
      lr: number;
      gradNorm: number;
      /** real (unpadded) tokens per second of this update's step time */
      tokensPerSecond: number;
      /** wall time of this update's step */
      stepMs: number;
      /** remaining updates × mean step time so far in this session */
      etaMs: number;
    }
  | { type: 'evaluated'; update: number; metrics: Metrics }
  /** `id`: the store's id of the checkpoint, when the save callback gave one */
  | { type: 'checkpoint'; update: number; reason: CheckpointRequest['reason']; id?: string };

export interface LoopHooks {
  /** called when an evaluation is due, with the updates done so far */
  evaluate?: (update: number) => Promise<Metrics> | Metrics;
  /** saves; may return the checkpoint's id, which the 'checkpoint' event then carries */
  saveCheckpoint?: (request: CheckpointRequest) => Promise<string | void> | string | void;
  onEvent?: (event: LoopEvent) => void;
  /** polled after every update */
  shouldStop?: () => boolean;
  signal?: AbortSignal;
  /** milliseconds now; default `performance.now()` */
  now?: () => number;
  /** lets other work run between updates; default a zero-delay timer */
  yieldToEvents?: () => Promise<void>;
}

/** How a loop ended (a NonFiniteError or a callback's error is thrown instead). */
export type LoopOutcome =
  /** every update of the plan was taken */
  | { status: 'finished'; state: RunState; lastLoss: number | null; metrics: Metrics | null }
  /** stopped on request between two updates; resume from `state` */
  | { status: 'stopped'; state: RunState; lastLoss: number | null };

export async function trainLoop(trainer: Trainer, task: TrainTask, hooks: LoopHooks = {}, resume?: RunState): Promise<LoopOutcome> {
  const plan = trainer.plan;
  const config = trainer.config;
  const now = hooks.now ?? (() => performance.now());
  const yieldToEvents = hooks.yieldToEvents ?? (() => new Promise<void>((resolve) => setTimeout(resolve, 0)));
  const emit = (event: LoopEvent) => hooks.onEvent?.(event);

  const takeStep = stepper(trainer, task);
  let order: DataOrder = { epoch: 0, index: 0 };
  if (resume !== undefined) {
    checkResume(resume, plan, trainer);
    order = resume.order;
  }
  const startUpdate = trainer.updatesDone;
  const state = (): RunState => ({
    trainer: trainer.state(),
    order: { ...order },
    totalUpdates: plan.totalUpdates,
    features: plan.features,
  });
  const save = async (reason: CheckpointRequest['reason'], metrics: Metrics | null) => {
    if (hooks.saveCheckpoint === undefined) return;
    const id = await hooks.saveCheckpoint({
      reason,
      state: state(),
      metrics,
      weights: () => trainer.params.toNamed(),
      optimizer: () => trainer.optimizerState(),
    });
    emit(
      typeof id === 'string'
        ? { type: 'checkpoint', update: trainer.updatesDone, reason, id }
        : { type: 'checkpoint', update: trainer.updatesDone, reason },
    );
  };
  const evaluate = async (update: number): Promise<Metrics | null> => {
    if (hooks.evaluate === undefined) return null;
    const metrics = await hooks.evaluate(update);
    emit({ type: 'evaluated', update, metrics });
    return metrics;
  };
  const stopRequested = () => hooks.signal?.aborted === true || hooks.shouldStop?.() === true;

  emit({ type: 'start', plan, startUpdate });
  let lastLoss: number | null = null;
  let stepTimeTotal = 0;

  for (let k = startUpdate; k < plan.totalUpdates; k++) {
    // 1. learning rate
    const lr = trainer.learningRate(k);

    // 2. evaluate / checkpoint when due — never at the update a run starts or resumes from:
    // a resumed run's checkpoint of that update is the one it was loaded from
    if (k > startUpdate) {
      const evalDue = config.evalEvery > 0 ? k % config.evalEvery === 0 : k % plan.updatesPerEpoch === 0;
      const checkpointDue = config.checkpointEvery > 0 ? k % config.checkpointEvery === 0 : evalDue;
      const metrics = evalDue ? await evaluate(k) : null;
      if (checkpointDue) await save('interval', metrics);
    }

    // 3. forward, backward, update
    const started = now();
    const { result, next } = takeStep(order, k, lr);
    order = next;
    lastLoss = result.loss;

    // 4. time and report
    const stepMs = now() - started;
    stepTimeTotal += stepMs;
    const done = k + 1 - startUpdate;
    emit({
      type: 'progress',
      update: k + 1,
      totalUpdates: plan.totalUpdates,
      epoch: Math.floor(k / plan.updatesPerEpoch),
      loss: result.loss,
      lr,
      gradNorm: result.gradNorm,
      tokensPerSecond: stepMs > 0 ? (result.tokens * 1000) / stepMs : 0,
      stepMs,
      etaMs: (stepTimeTotal / done) * (plan.totalUpdates - (k + 1)),
    });

    // 5. stop?
    await yieldToEvents();
    if (stopRequested() && k + 1 < plan.totalUpdates) {
      await save('stop', null);
      return { status: 'stopped', state: state(), lastLoss };
    }
  }

  const metrics = await evaluate(plan.totalUpdates);
  await save('end', metrics);
  return { status: 'finished', state: state(), lastLoss, metrics };
}

/** One update of the task from data position `order`: collate its micro-batches, step. */
type Stepper = (order: DataOrder, update: number, lr: number) => { result: StepResult; next: DataOrder };

function stepper(trainer: Trainer, task: TrainTask): Stepper {
  const { seed, trimPadding, mlmProbability } = trainer.config;
  if (task.kind === 'span') {
    const sampler = new UpdateSampler(task.features, trainer.plan, seed);
    return (order, _update, lr) => {
      const { groups, next } = sampler.take(order);
      return {
        result: trainer.step(
          groups.map((group) => collateSpan(group, trimPadding)),
          lr,
        ),
        next,
      };
    };
  }
  const sampler = new UpdateSampler(task.sequences, trainer.plan, seed);
  const masking: MlmMasking = { ...task.masking, probability: mlmProbability };
  return (order, update, lr) => {
    const { groups, next } = sampler.take(order);
    // each micro-batch's masks are fixed by (seed, update, micro-batch), like its dropout
    const batches = groups.map((group, micro) => collateMlm(group, masking, seedAt(seed, 'mlm', update, micro), trimPadding));
    return { result: trainer.mlmStep(batches, lr), next };
  };
}

/** A saved run fits this trainer and plan, and its data position is where its update count says. */
function checkResume(resume: RunState, plan: TrainPlan, trainer: Trainer): void {
  if (resume.totalUpdates !== plan.totalUpdates || resume.features !== plan.features) {
    throw new Error(
      `resume: the saved run planned ${resume.totalUpdates} updates over ${resume.features} features; ` +
        `this run plans ${plan.totalUpdates} over ${plan.features} — same data and settings are needed to resume`,
    );
  }
  if (resume.trainer.update !== trainer.updatesDone) {
    throw new Error(
      `resume: the saved run is at update ${resume.trainer.update} but the trainer is at ${trainer.updatesDone}; call trainer.restore first`,
    );
  }
  const expected = orderAtUpdate(plan, resume.trainer.update);
  if (resume.order.epoch !== expected.epoch || resume.order.index !== expected.index) {
    throw new Error(
      `resume: saved data position (epoch ${resume.order.epoch}, index ${resume.order.index}) does not match update ` +
        `${resume.trainer.update} (expected epoch ${expected.epoch}, index ${expected.index})`,
    );
  }
}
