// defines: RunSummary, nextRunName, checkRunName, keepsTunedReader, recordRun,
// tunedReaderName — the rules for training runs that have names and a history: each run
// gets a name for people ("run 3", "practice 2", or the user's own), kept in its
// checkpoints' meta and in the workbench's list of runs; a run replaces the fine-tuned
// reader in use only when it has something to show for itself.
import type { RunStage } from '../train/finetune.js';

/** One run in the history, as plain data (the workbench keeps these in IndexedDB). */
export interface RunSummary {
  runId: string;
  /** the run's name for people, unique in the history */
  name: string;
  stage: RunStage;
  /** running, paused, stopped, finished, interrupted, failed (the page's RunStatus) */
  status: string;
  /** ISO times */
  startedAt: string;
  endedAt?: string;
  update: number;
  totalUpdates: number;
  /** the last validation F1 the run measured, if any */
  lastF1?: number;
  /** the base reader it trained from */
  baseName: string;
}

/** Longest run name accepted: it heads table columns and file names. */
export const RUN_NAME_MAX = 60;

/** The default name of the next run of a stage: "run N" for fine-tuning, "practice N" for the stages before it, N one past the highest in use. */
export function nextRunName(history: readonly Pick<RunSummary, 'name' | 'stage'>[], stage: RunStage = 'fine-tune'): string {
  const stem = stage === 'fine-tune' ? 'run' : 'practice';
  const pattern = new RegExp(`^${stem} (\\d+)$`);
  let highest = 0;
  for (const r of history) {
    const m = pattern.exec(r.name);
    if (m) highest = Math.max(highest, Number(m[1]));
  }
  // a name typed by the user may still collide ("run 2" typed for a practice run): step past it
  const taken = new Set(history.map((r) => r.name));
  let n = highest + 1;
  while (taken.has(`${stem} ${n}`)) n++;
  return `${stem} ${n}`;
}

/** A typed run name, trimmed; an error message for people when it cannot be used. */
export function checkRunName(typed: string, history: readonly Pick<RunSummary, 'name'>[]): { name: string } | { error: string } {
  const name = typed.trim().replace(/\s+/g, ' ');
  if (name === '') return { error: 'Give the run a name (or keep the one suggested).' };
  if (name.length > RUN_NAME_MAX) return { error: `A run name can have at most ${RUN_NAME_MAX} characters; this one has ${name.length}.` };
  if (history.some((r) => r.name === name)) return { error: `There is already a run named “${name}”; choose another name.` };
  return { name };
}

/**
 * Whether a run that just ended becomes the fine-tuned reader in use. A finished run
 * does; a run stopped or paused on request does only when it saved a checkpoint of its
 * own (its weights can then be found again, and it took at least one update). A stopped
 * run with no checkpoint leaves the reader in use as it was — a finished run's reader
 * is never replaced by one that has nothing saved.
 */
export function keepsTunedReader(ended: { status: 'finished' | 'stopped'; checkpointId: string | null; update: number }): boolean {
  if (ended.status === 'finished') return true;
  return ended.checkpointId !== null && ended.update > 0;
}

/** The history with `run` added, or the entry of the same id replaced; newest first. */
export function recordRun(history: readonly RunSummary[], run: RunSummary): RunSummary[] {
  const rest = history.filter((r) => r.runId !== run.runId);
  return [run, ...rest].sort((a, b) => b.startedAt.localeCompare(a.startedAt));
}

/**
 * The fine-tuned reader's name for people: "run 2, update 40" for a finished run,
 * "run 2, update 16 (unfinished)" for one paused or stopped before its last update,
 * "run 2, update 16 (restored checkpoint)" for a checkpoint brought back.
 */
export function tunedReaderName(run: { name: string }, update: number, how: 'finished' | 'stopped' | 'restored'): string {
  const what = how === 'finished' ? '' : how === 'restored' ? ' (restored checkpoint)' : ' (unfinished)';
  return `${run.name}, update ${update}${what}`;
}
