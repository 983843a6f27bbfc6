// defines: stageLabel, checkpointLabel, runLabel, metricLabel — the words people see for a
// checkpoint and its measurements, in the workbench and in exported model cards alike,
// instead of the store's ids ("ckpt-120-lz3k…") and the metric keys ("validationF1").
import type { RunStage } from '../train/finetune.js';

/** The stage that saved a checkpoint; an older checkpoint without one was saved by fine-tuning. */
export function stageLabel(stage: RunStage | undefined): string {
  if (stage === 'practice') return 'practice';
  if (stage === 'domain') return 'masked-LM';
  return 'fine-tuning';
}

/** "fine-tuned, update 120", "practice, update 200", "masked-LM, update 100". */
export function checkpointLabel(meta: { stage?: RunStage; step: number }): string {
  const what = meta.stage === 'practice' || meta.stage === 'domain' ? stageLabel(meta.stage) : 'fine-tuned';
  return `${what}, update ${meta.step}`;
}

/** The run that saved a checkpoint, by its name; "earlier run" for a checkpoint from before runs had names. */
export function runLabel(meta: { runName?: string }): string {
  return meta.runName ?? 'earlier run';
}

const METRICS: Record<string, string> = {
  validationEM: 'validation EM',
  validationF1: 'validation F1',
  loss: 'training loss',
};

/** A checkpoint metric's name for people; an unknown key has its camel case split. */
export function metricLabel(key: string): string {
  return METRICS[key] ?? key.replace(/([a-z0-9])([A-Z])/g, '$1 $2').toLowerCase();
}
