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
//
// A time budget (TimeBudget, for pretraining) replaces the update count as the clock:
// the learning rate warms up over the budget's first share of *training time* and
// decays linearly to 0 at its end, and the run ends when its share of the budget is
// spent (or the plan's updates, an upper bound, run out). Evaluation and checkpoint
// time is not training time. The rate reaches 0 when the budget ends however fast the
// (shared) machine turns out to be; the price is that such a run is not repeatable
// update for update, only its data order, masks and dropout are.

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
  /** training milliseconds spent on a TimeBudget's clock (time-budgeted runs only) */
  trainingMs?: number;
}

/**
 * A schedule on training time. `totalMs` is the whole schedule, which may span several
 * loops (phases at different window lengths); this loop trains from `fromMs` to
 * `untilMs` on that clock (a resumed loop from its RunState's `trainingMs`).
 */
export interface TimeBudget {
  totalMs: number;
  fromMs: number;
  untilMs: number;
  /** share of `totalMs` spent warming the rate up from 0 */
  warmupShare: number;
  /** evaluate / checkpoint every this much training time instead of the config's update counts */
  evalEveryMs?: number;
  checkpointEveryMs?: number;
}

/** The rate at `ms` of training time under `budget`: linear warmup, then linear decay to 0 at `totalMs`. */
export function learningRateAtTime(baseLearningRate: number, budget: Pick<TimeBudget, 'totalMs' | 'warmupShare'>, ms: number): number {
  const fraction = Math.min(1, Math.max(0, ms / budget.totalMs));
  if (fraction < budget.warmupShare) return (baseLearningRate * fraction) / budget.warmupShare;
  if (budget.warmupShare >= 1) return 0;
  return baseLearningRate * Math.max(0, (1 - fraction) / (1 - budget.warmupShare));
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
      /** real (unpadded) tokens in this update */
      tokens: number;
      /** real (unpadded) tokens per second of this update's step time */
      tokensPerSecond: number;
      /** wall time of this update's step */
      stepMs: number;
      /** remaining updates × mean step time so far in this session (under a TimeBudget: the budget left) */
      etaMs: number;
      /** training time on the TimeBudget's clock after this update (time-budgeted runs only) */
      trainingMs?: number;
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

export async function trainLoop(
  trainer: Trainer,
  task: TrainTask,
  hooks: LoopHooks = {},
  resume?: RunState,
  budget?: TimeBudget,
): Promise<LoopOutcome> {
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
  // the budget's clock: training time only (evaluations and saves are paused out of it)
  const clockStart = budget === undefined ? 0 : (resume?.trainingMs ?? budget.fromMs);
  const sessionStart = now();
  let pausedMs = 0;
  const clock = () => clockStart + (now() - sessionStart - pausedMs);
  const paused = async <T>(work: () => Promise<T>): Promise<T> => {
    const t0 = now();
    try {
      return await work();
    } finally {
      pausedMs += now() - t0;
    }
  };
  const state = (): RunState => ({
    trainer: trainer.state(),
    order: { ...order },
    totalUpdates: plan.totalUpdates,
    features: plan.features,
    ...(budget === undefined ? {} : { trainingMs: clock() }),
  });
  const save = async (reason: CheckpointRequest['reason'], metrics: Metrics | null) => {
    if (hooks.saveCheckpoint === undefined) return;
    const saveState = state();
    const id = await paused(async () =>
      hooks.saveCheckpoint!({
        reason,
        state: saveState,
        metrics,
        weights: () => trainer.params.toNamed(),
        optimizer: () => trainer.optimizerState(),
      }),
    );
    emit(
      typeof id === 'string'
        ? { type: 'checkpoint', update: trainer.updatesDone, reason, id }
        : { type: 'checkpoint', update: trainer.updatesDone, reason },
    );
  };
  const evaluate = async (update: number): Promise<Metrics | null> => {
    if (hooks.evaluate === undefined) return null;
    const metrics = await paused(async () => hooks.evaluate!(update));
    emit({ type: 'evaluated', update, metrics });
    return metrics;
  };
  const stopRequested = () => hooks.signal?.aborted === true || hooks.shouldStop?.() === true;

  emit({ type: 'start', plan, startUpdate });
  let lastLoss: number | null = null;
  let stepTimeTotal = 0;

  const budgetLeft = () => budget === undefined || clock() < budget.untilMs;
  let lastEvalMs = clockStart;
  let lastCheckpointMs = clockStart;
  const due = (k: number) => {
    let evalDue = config.evalEvery > 0 ? k % config.evalEvery === 0 : k % plan.updatesPerEpoch === 0;
    let checkpointDue = config.checkpointEvery > 0 ? k % config.checkpointEvery === 0 : evalDue;
    if (budget?.evalEveryMs !== undefined && budget.evalEveryMs > 0) evalDue = clock() - lastEvalMs >= budget.evalEveryMs;
    if (budget?.checkpointEveryMs !== undefined && budget.checkpointEveryMs > 0)
      checkpointDue = clock() - lastCheckpointMs >= budget.checkpointEveryMs;
    if (evalDue) lastEvalMs = clock();
    if (checkpointDue) lastCheckpointMs = clock();
    return { evalDue, checkpointDue };
  };
  for (let k = startUpdate; k < plan.totalUpdates && budgetLeft(); k++) {
    // 1. learning rate
    const lr = budget === undefined ? trainer.learningRate(k) : learningRateAtTime(plan.baseLearningRate, budget, clock());

    // 2. evaluate / checkpoint when due — never at the update a run starts or resumes from:
    // a resumed run's checkpoint of that update is the one it was loaded from
    if (k > startUpdate) {
      const { evalDue, checkpointDue } = due(k);
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
      tokens: result.tokens,
      tokensPerSecond: stepMs > 0 ? (result.tokens * 1000) / stepMs : 0,
      stepMs,
      etaMs: budget === undefined ? (stepTimeTotal / done) * (plan.totalUpdates - (k + 1)) : Math.max(0, budget.untilMs - clock()),
      ...(budget === undefined ? {} : { trainingMs: clock() }),
    });

    // 5. stop?
    await yieldToEvents();
    if (stopRequested() && k + 1 < plan.totalUpdates && budgetLeft()) {
      await save('stop', null);
      return { status: 'stopped', state: state(), lastLoss };
    }
  }

  const metrics = await evaluate(trainer.updatesDone);
  // a run resumed with nothing left to do (it had finished, or its time budget was spent)
  // keeps the checkpoint it was loaded from: saving again would only duplicate it
  if (resume === undefined || trainer.updatesDone > startUpdate) await save('end', metrics);
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
