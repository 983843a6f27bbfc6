// defines: the `features` command — tokenizes a question file with a vocabulary and
// reports how its questions become model inputs: windows per question, answers that no
// window holds whole, and answers whose start or end falls inside a token.
import type { Command } from 'commander';
import cliProgress from 'cli-progress';
import { UserError, printJson, readBytes, runCommand } from '../common.js';
import { loadDataset } from '../../data/load.js';
import { DEFAULT_FEATURE_OPTIONS, FeatureBuilder, type FeatureOptions } from '../../text/features.js';
import { VocabularyError, WordPieceTokenizer } from '../../text/wordpiece.js';
import { resolveWindows } from '../../session/windows.js';

interface FeaturesOptions {
  vocab: string;
  maxLen: string;
  stride?: string;
  maxQuery?: string;
  cased?: boolean;
  uncased?: boolean;
  json?: boolean;
}

/** Files with fewer questions than this finish too fast for a progress bar to help. */
const PROGRESS_MIN_RECORDS = 2000;
/** Examples printed of each kind of trouble. */
const SHOWN = 5;

export function register(program: Command): void {
  program
    .command('features')
    .description('tokenize a question file and report windows per question, lost answers and token boundary mismatches')
    .argument('<file>', 'the data file (SQuAD JSON, JSONL, CSV, TSV)')
    .requiredOption('--vocab <file>', 'the vocabulary: a vocab.txt (one token per line) or a tokenizer.json')
    .option('--max-len <n>', 'max sequence length in tokens, special tokens included', String(DEFAULT_FEATURE_OPTIONS.maxLength))
    .option(
      '--stride <n>',
      `context tokens shared by consecutive windows (default ${DEFAULT_FEATURE_OPTIONS.stride}, or half the context room of a short window)`,
    )
    .option(
      '--max-query <n>',
      `question tokens kept; longer questions are cut (default ${DEFAULT_FEATURE_OPTIONS.maxQueryLength}, or a third of a short window)`,
    )
    .option('--cased', 'a vocab.txt is cased: no lowercasing or accent stripping')
    .option('--uncased', 'a vocab.txt is uncased: lowercase and strip accents')
    .option('--json', 'print {questions, windows, answers_lost, boundary_mismatches, ...} as one JSON line last')
    .addHelpText(
      'after',
      `
Each question becomes [CLS] question [SEP] context [SEP], padded to the max length. A
context too long for one sequence is cut into windows; consecutive windows share
--stride context tokens. A question's answer is "lost" when no window holds all of it
(training then sees only "no answer" for it); a "boundary mismatch" is an answer whose
start or end falls inside a token, so the model can only point at a longer span.

Without --cased or --uncased, a vocab.txt is taken as uncased unless it holds tokens
with uppercase letters; a tokenizer.json says which it is.

Records with errors (see \`spanwright check\`) are left out.

Examples:
  spanwright features questions.jsonl --vocab tiny-models/vocab-demo/vocab.txt
  spanwright features squad-dev.json --vocab tokenizer.json --max-len 256 --stride 64 --json`,
    )
    .action((file: string, options: FeaturesOptions) => runCommand(() => features(file, options)));
}

function wholeNumber(value: string, flag: string): number {
  const n = Number(value);
  if (!/^\d+$/.test(value.trim()) || !Number.isSafeInteger(n)) throw new UserError(`${flag} must be a whole number, not "${value}"`);
  return n;
}

async function loadTokenizer(path: string, options: FeaturesOptions): Promise<WordPieceTokenizer> {
  if (options.cased && options.uncased) throw new UserError('--cased and --uncased cannot both be given');
  const bytes = await readBytes(path);
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(bytes);
  } catch {
    throw new UserError(`${path}: not UTF-8 text`);
  }
  const lowercase = options.cased ? false : options.uncased ? true : undefined;
  try {
    return WordPieceTokenizer.fromFileText(text, path, { lowercase });
  } catch (err) {
    if (err instanceof VocabularyError) throw new UserError(err.message);
    throw err;
  }
}

async function features(file: string, options: FeaturesOptions): Promise<number> {
  // the stride and question length a window of this length gets by the one rule
  // (src/session/windows.ts), so --max-len 128 alone works; no reader, so no position table
  let settings: FeatureOptions;
  try {
    settings = resolveWindows(
      {
        maxLength: wholeNumber(options.maxLen, '--max-len'),
        stride: options.stride === undefined ? undefined : wholeNumber(options.stride, '--stride'),
        maxQueryLength: options.maxQuery === undefined ? undefined : wholeNumber(options.maxQuery, '--max-query'),
      },
      { maxPositions: Number.MAX_SAFE_INTEGER },
    ).features;
  } catch (err) {
    if (err instanceof RangeError) throw new UserError(err.message.replace(/^(\w+)/, (k) => `--${flagName(k)}`));
    throw err;
  }
  const tokenizer = await loadTokenizer(options.vocab, options);
  let builder: FeatureBuilder;
  try {
    builder = new FeatureBuilder(tokenizer, settings);
  } catch (err) {
    if (err instanceof RangeError) throw new UserError(err.message.replace(/^(\w+)/, (k) => `--${flagName(k)}`));
    throw err;
  }

  const loaded = loadDataset(await readBytes(file), file);
  const leftOut = new Set(loaded.problems.filter((p) => p.severity === 'error' && p.record >= 0).map((p) => p.record)).size;
  const fileError = loaded.problems.find((p) => p.severity === 'error' && p.record < 0);
  if (loaded.records.length === 0) {
    throw new UserError(fileError ? `${file}: ${fileError.message}` : `${file}: no usable questions (run \`spanwright check ${file}\`)`);
  }

  const records = loaded.records;
  const perQuestion = new Map<number, number>(); // windows → questions
  let windows = 0;
  let answersLost = 0;
  let mismatches = 0;
  let truncated = 0;
  const lostExamples: string[] = [];
  const mismatchExamples: string[] = [];
  const warningExamples: string[] = [];

  const showBar = !options.json && process.stderr.isTTY && records.length >= PROGRESS_MIN_RECORDS;
  const bar = showBar
    ? new cliProgress.SingleBar(
        { stream: process.stderr, format: 'tokenizing {bar} {value}/{total} questions', hideCursor: true },
        cliProgress.Presets.shades_classic,
      )
    : null;
  bar?.start(records.length, 0);
  records.forEach((record, i) => {
    const out = builder.build(record);
    windows += out.features.length;
    perQuestion.set(out.features.length, (perQuestion.get(out.features.length) ?? 0) + 1);
    if (out.answerLost) {
      answersLost++;
      if (lostExamples.length < SHOWN) lostExamples.push(`  ${record.id}: ${JSON.stringify(clip(record.answers[0]?.text ?? ''))}`);
    }
    if (out.boundaryMismatch) {
      mismatches++;
      if (mismatchExamples.length < SHOWN) mismatchExamples.push(`  ${record.id}: ${JSON.stringify(clip(record.answers[0]?.text ?? ''))}`);
    }
    if (out.warnings.some((w) => w.includes('only the first'))) truncated++;
    for (const w of out.warnings) if (warningExamples.length < SHOWN) warningExamples.push(`  ${w}`);
    if (i % 256 === 0) bar?.update(i);
  });
  bar?.update(records.length);
  bar?.stop();

  const distribution = Object.fromEntries([...perQuestion.entries()].sort((a, b) => a[0] - b[0]).map(([k, v]) => [String(k), v]));
  if (options.json) {
    printJson({
      questions: records.length,
      windows,
      answers_lost: answersLost,
      boundary_mismatches: mismatches,
      windows_per_question: distribution,
      truncated_questions: truncated,
      left_out_records: leftOut,
    });
    return 0;
  }
  const out = process.stdout;
  const { maxLength, stride, maxQueryLength } = builder.options;
  out.write(
    `${file}: ${records.length} question(s), ${windows} window(s) (max length ${maxLength}, stride ${stride}, max question ${maxQueryLength} tokens)\n`,
  );
  if (leftOut > 0) out.write(`${leftOut} record(s) with errors left out (see \`spanwright check ${file}\`)\n`);
  out.write('windows per question:\n');
  for (const [k, v] of Object.entries(distribution)) out.write(`  ${k.padStart(3)}: ${v}\n`);
  out.write(`answers lost (no window holds the whole answer): ${answersLost}\n`);
  for (const l of lostExamples) out.write(`${l}\n`);
  out.write(`boundary mismatches (answer starts or ends inside a token): ${mismatches}\n`);
  for (const l of mismatchExamples) out.write(`${l}\n`);
  if (truncated > 0) out.write(`questions cut to ${maxQueryLength} tokens: ${truncated}\n`);
  for (const l of warningExamples) out.write(`${l}\n`);
  return 0;
}

function flagName(key: string): string {
  return key === 'maxLength' ? 'max-len' : key === 'maxQueryLength' ? 'max-query' : key;
}

function clip(s: string): string {
  return s.length > 60 ? `${s.slice(0, 57)}...` : s;
}
