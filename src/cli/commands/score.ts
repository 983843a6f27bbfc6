// defines: the `score` command — exact match and F1 of a predictions file against a gold
// question file, by the SQuAD 2.0 evaluation rules (src/eval/squad-metric.ts), answerable
// and unanswerable apart; with --na-prob, the best no-answer threshold too.
import type { Command } from 'commander';
import { UserError, printJson, readBytes, runCommand } from '../common.js';
import { loadDataset } from '../../data/load.js';
import { decodeText } from '../../data/decode.js';
import { parseJson } from '../../data/json-syntax.js';
import { describeValue, formatProblem } from '../../data/validate.js';
import {
  evaluate,
  findBestThresholds,
  goldFromRecords,
  missingPredictions,
  normalizeAnswer,
  type SplitScores,
  type ThresholdSearch,
} from '../../eval/squad-metric.js';

interface ScoreOptions {
  gold: string;
  pred: string;
  naProb?: string;
  json?: boolean;
}

/** Ids listed in a message before "and N more". */
const SHOWN_IDS = 5;

export function register(program: Command): void {
  program
    .command('score')
    .description('score predicted answers against gold questions: exact match and F1 (SQuAD 2.0 rules)')
    .requiredOption('--gold <file>', 'the gold questions: SQuAD JSON, JSONL or CSV, as `check` reads them')
    .requiredOption('--pred <file>', 'predictions: a JSON object from question id to answer text ("" = no answer)')
    .option(
      '--na-prob <file>',
      'a JSON object from question id to no-answer score (null score − best span score); enables the threshold search',
    )
    .option('--json', 'print the scores as one JSON object on the last line of output')
    .addHelpText(
      'after',
      `
Scores are percentages. Gold answers are read as the SQuAD 2.0 evaluation script
reads them, by their texts: one whose offset is wrong, or whose text is not in its
context, is still scored, with a warning (\`check\` reports it as an error). A question with no prediction counts as answered "" (no answer),
with a warning saying how many. With --na-prob, the predictions are read as the best
span of each question, and the command reports the threshold on the no-answer score
that gives the best exact match and the best F1 (predict "" where the score is above it);
a score of null means no span was found.

JSON output: {em, f1, total, answerable: {em, f1, total}, unanswerable: {em, f1, total},
missing, threshold?: {bestEm, bestEmThreshold, bestF1, bestF1Threshold}}; em and f1 are
null for a split with no questions.

Examples:
  spanwright score --gold dev.json --pred predictions.json
  spanwright score --gold dev.jsonl --pred predictions.json --na-prob scores.json --json`,
    )
    .action((options: ScoreOptions) => runCommand(() => score(options)));
}

async function score(options: ScoreOptions): Promise<void> {
  const gold = await readGold(options.gold);
  const predictions = readStringMap(options.pred, await readJsonObject(options.pred));
  const goldIds = new Set(gold.map((g) => g.id));

  const missing = missingPredictions(gold, predictions);
  if (missing.length > 0) {
    warn(`${options.pred}: no prediction for ${missing.length} of ${gold.length} question(s) ${listIds(missing)}; counted as no answer`);
  }
  const extra = Object.keys(predictions).filter((id) => !goldIds.has(id));
  if (extra.length > 0) {
    warn(`${options.pred}: ${extra.length} prediction(s) for questions not in ${options.gold} ${listIds(extra)}; ignored`);
  }

  const scores = evaluate(gold, predictions);
  let threshold: ThresholdSearch | undefined;
  if (options.naProb !== undefined) {
    const diffs = readNumberMap(options.naProb, await readJsonObject(options.naProb));
    // the search needs a score wherever answering would change the prediction
    const needed = gold
      .filter((g) => Object.hasOwn(predictions, g.id) && normalizeAnswer(predictions[g.id]!) !== '')
      .filter((g) => !Object.hasOwn(diffs, g.id))
      .map((g) => g.id);
    if (needed.length > 0) {
      throw new UserError(`${options.naProb}: no score for ${needed.length} question(s) that have a predicted answer ${listIds(needed)}`);
    }
    threshold = findBestThresholds(gold, predictions, diffs);
  }

  if (options.json) {
    printJson({ ...scores, missing: missing.length, ...(threshold ? { threshold } : {}) });
    return;
  }
  const out = process.stdout;
  out.write(`${options.pred} against ${options.gold}\n\n`);
  out.write(`${'questions'.padEnd(14)}${'EM'.padStart(8)}${'F1'.padStart(8)}${'count'.padStart(8)}\n`);
  const row = (name: string, s: SplitScores): string =>
    `${name.padEnd(14)}${percent(s.em).padStart(8)}${percent(s.f1).padStart(8)}${String(s.total).padStart(8)}\n`;
  out.write(row('all', scores));
  out.write(row('answerable', scores.answerable));
  out.write(row('unanswerable', scores.unanswerable));
  if (threshold) {
    out.write(
      `\nbest no-answer threshold: EM ${percent(threshold.bestEm)} at ${threshold.bestEmThreshold}, ` +
        `F1 ${percent(threshold.bestF1)} at ${threshold.bestF1Threshold}\n`,
    );
  }
}

function percent(v: number | null): string {
  return v === null ? '-' : v.toFixed(2);
}

function warn(message: string): void {
  process.stderr.write(`spanwright: warning: ${message}\n`);
}

function listIds(ids: readonly string[]): string {
  const shown = ids
    .slice(0, SHOWN_IDS)
    .map((id) => JSON.stringify(id))
    .join(', ');
  return ids.length > SHOWN_IDS ? `(${shown} and ${ids.length - SHOWN_IDS} more)` : `(${shown})`;
}

/**
 * Gold questions through the data importers, read as the SQuAD 2.0 evaluation script reads
 * them: an answer whose offset is wrong, or whose text is not in the context, is still
 * scored by its text, with a warning; records that fail other checks are left out, with a
 * warning. (`check` and `train` stay strict.)
 */
async function readGold(file: string) {
  const result = loadDataset(await readBytes(file), file, { answers: 'texts' });
  const byText = result.problems.filter((p) => p.code === 'answer-scored-by-text');
  if (byText.length > 0) {
    process.stderr.write(`spanwright: ${formatProblem(byText[0]!)}\n`);
    warn(`${file}: ${byText.length} answer(s) not found at their offset in the context are scored by their text alone`);
  }
  const errors = result.problems.filter((p) => p.severity === 'error');
  if (result.records.length === 0) {
    const first = errors[0];
    throw new UserError(first ? `no usable gold questions: ${formatProblem(first)}` : `${file}: no gold questions`);
  }
  if (errors.length > 0) {
    warn(`${formatProblem(errors[0]!)}`);
    warn(
      `${file}: ${errors.length} error(s); the questions they affect are left out of the score (\`spanwright check ${file}\` lists them)`,
    );
  }
  return goldFromRecords(result.records);
}

/** A JSON file whose top level must be an object; errors name the file and the place. */
async function readJsonObject(file: string): Promise<Record<string, unknown>> {
  const decoded = decodeText(await readBytes(file));
  if (!decoded.ok) throw new UserError(`${file}: line ${decoded.line}: ${decoded.message}`);
  const parsed = parseJson(decoded.text);
  if (!parsed.ok) throw new UserError(`${file}: line ${parsed.line}, column ${parsed.column}: ${parsed.message}`);
  const v = parsed.value;
  if (typeof v !== 'object' || v === null || Array.isArray(v)) {
    throw new UserError(`${file}: expected a JSON object from question id to value, found ${describeValue(v)}`);
  }
  return v as Record<string, unknown>;
}

function readStringMap(file: string, obj: Record<string, unknown>): Record<string, string> {
  const out: Record<string, string> = Object.create(null); // ids such as "__proto__" stay plain keys
  for (const [id, v] of Object.entries(obj)) {
    if (typeof v !== 'string') {
      throw new UserError(
        `${file}: question ${JSON.stringify(id)}: the answer must be a string ("" for no answer), found ${describeValue(v)}`,
      );
    }
    out[id] = v;
  }
  return out;
}

function readNumberMap(file: string, obj: Record<string, unknown>): Record<string, number> {
  const out: Record<string, number> = Object.create(null);
  for (const [id, v] of Object.entries(obj)) {
    // null is how JSON writes +Infinity: the decoder found no span at all
    if (v === null) out[id] = Infinity;
    else if (typeof v === 'number') out[id] = v;
    else throw new UserError(`${file}: question ${JSON.stringify(id)}: the no-answer score must be a number, found ${describeValue(v)}`);
  }
  return out;
}
