// defines: the page's own IndexedDB database ("spanwright-workbench", via idb) and the
// plain-data shapes it keeps: the dataset and its passages, the split (by passage, or the
// questions imported as validation), the base reader's
// files, the training settings, the state of the last training run, the history of runs,
// the fine-tuned reader in use (by its checkpoint) and the practice stage the next run
// starts from. Checkpoints live
// in the worker's database (src/io/idb-store.ts), not here.
//
// One object store `kv`, keyed by the names in WorkbenchState; each value is written
// whole, so a save is one transaction and a reload finds either the old or the new value.
import { openDB, type DBSchema, type IDBPDatabase } from 'idb';
import type { QARecord } from '../src/data/record.js';
import { DEFAULT_SPLIT, type SplitChoice } from '../src/data/split.js';
import type { RunSummary } from '../src/session/runs.js';
import type { TrainConfig } from '../src/train/config.js';
import type { DecodingChoice, ModelFiles } from '../workers/protocol.js';
import type { PracticeSettings } from './practice-panel.js';

export interface Passage {
  id: string;
  text: string;
  title?: string;
}

export interface Dataset {
  records: QARecord[];
  /** every passage: those the records use and plain ones added for labelling */
  passages: Passage[];
  /** file names imported, in order */
  sources: string[];
  /**
   * ids of the questions imported as validation ("Choose a validation file", the demo's
   * validation.jsonl); they validate when the split's mode is 'file' (src/data/split.ts)
   */
  validationIds: string[];
}

/** How questions divide into training and validation; kept under `split`. */
export type SplitSettings = SplitChoice;

export interface StoredBase {
  name: string;
  files: ModelFiles;
}

/**
 * Where a training run stands, as the page saw it:
 *   running      the worker is training it now
 *   paused       halted on request with a checkpoint; "resume" continues it
 *   stopped      halted on request and closed; its checkpoints stay
 *   finished     every planned update was taken
 *   interrupted  the page was reloaded or crashed while it ran; continue from its last checkpoint
 *   failed       the worker reported an error (in `error`)
 */
export type RunStatus = 'running' | 'paused' | 'stopped' | 'finished' | 'interrupted' | 'failed';

/** Chart series: parallel arrays, one entry per update or evaluation. */
export interface RunSeries {
  update: number[];
  loss: number[];
  lr: number[];
  tokensPerSecond: number[];
  evalUpdate: number[];
  em: number[];
  f1: number[];
}

export interface RunRecord {
  runId: string;
  /** the run's name for people (src/session/runs.ts); absent in runs saved before runs had names */
  name?: string;
  status: RunStatus;
  config: TrainConfig;
  datasetHash: string;
  baseName: string;
  /** ISO time the run first started */
  startedAt: string;
  update: number;
  totalUpdates: number;
  etaMs: number;
  lastCheckpoint: { id: string; step: number } | null;
  series: RunSeries;
  error?: string;
  /** which stage the run is: the practice stage, or fine-tuning on labelled questions (absent: fine-tuning) */
  stage?: 'domain' | 'practice' | 'fine-tune';
  /** a practice run's question settings, to continue it with the same questions */
  practice?: { perPassage: number; seed: number; questionMatch: boolean; domainMinutes?: number; domainDone?: { checkpointId: string } };
}

/** A finished practice stage: the start reader fine-tuning begins from, kept as a checkpoint. */
export interface PracticeState {
  checkpointId: string;
  questions: number;
  updates: number;
  /** ISO time it finished */
  finishedAt: string;
  /** the base reader it was trained from */
  baseName: string;
}

/** The fine-tuned reader in use, to bring back after a reload: the checkpoint that holds it. */
export interface TunedState {
  checkpointId: string;
  /** its name for people (src/session/runs.ts tunedReaderName) */
  name: string;
  /** the base reader it was trained from; another base loaded makes it void */
  baseName: string;
  /** the no-answer cut and kind bonus its run chose on the training questions (not in the checkpoint) */
  decoding?: DecodingChoice;
}

export interface WorkbenchState {
  dataset: Dataset;
  /** every run started, newest first */
  runs: RunSummary[];
  tuned: TunedState | null;
  /** 2: the window settings were moved from the old defaults 256/64 (or never had them) */
  settingsVersion: number;
  split: SplitSettings;
  base: StoredBase;
  settings: TrainConfig;
  run: RunRecord;
  practice: PracticeState | null;
  practiceSettings: PracticeSettings;
}

interface WorkbenchDb extends DBSchema {
  kv: { key: string; value: unknown };
}

let db: Promise<IDBPDatabase<WorkbenchDb>> | null = null;

function open(): Promise<IDBPDatabase<WorkbenchDb>> {
  db ??= openDB<WorkbenchDb>('spanwright-workbench', 1, {
    upgrade(d) {
      if (!d.objectStoreNames.contains('kv')) d.createObjectStore('kv');
    },
  });
  return db;
}

export async function loadState<K extends keyof WorkbenchState>(key: K): Promise<WorkbenchState[K] | undefined> {
  return (await (await open()).get('kv', key)) as WorkbenchState[K] | undefined;
}

export async function saveState<K extends keyof WorkbenchState>(key: K, value: WorkbenchState[K]): Promise<void> {
  await (await open()).put('kv', value, key);
}

export async function clearState(key: keyof WorkbenchState): Promise<void> {
  await (await open()).delete('kv', key);
}

export function emptySeries(): RunSeries {
  return { update: [], loss: [], lr: [], tokensPerSecond: [], evalUpdate: [], em: [], f1: [] };
}

export function emptyDataset(): Dataset {
  return { records: [], passages: [], sources: [], validationIds: [] };
}

/** A stored dataset, with the fields later versions added filled in (none imported as validation). */
export function storedDataset(stored: Partial<Dataset> | undefined): Dataset {
  return { ...emptyDataset(), ...(stored ?? {}) };
}

/** Stored split settings; those written before the choice of mode split by passage. */
export function storedSplit(stored: Partial<SplitSettings> | undefined): SplitSettings {
  return { ...DEFAULT_SPLIT, ...(stored ?? {}) };
}
