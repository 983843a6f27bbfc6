// defines: the `eval` and `predict` commands — a model directory over a question file:
// SQuAD 2.0 EM/F1 (answerable and unanswerable apart, with the tuned no-answer
// threshold), or the id → answer map that `score` reads.
import { writeFile } from 'node:fs/promises';
import type { Command } from 'commander';
import { printJson, runCommand } from '../common.js';
import { loadReader, loadRecords, startEngine, windowOptions } from '../model-dir.js';
import { countProgress } from '../progress.js';
import { readerWarnings } from '../../eval/reader-warnings.js';
import { scoresObject, scoresTable } from '../scores.js';
import { DEFAULT_FEATURE_OPTIONS } from '../../text/features.js';

interface ReadOptions {
  model: string;
  data: string;
  maxLen: string;
  stride: string;
  json?: boolean;
  out?: string;
  naProb?: string;
  threshold?: string;
}

const log = (line: string) => process.stderr.write(`${line}\n`);

async function read(o: ReadOptions) {
  await startEngine();
  const { predictRecords } = await import('../../eval/evaluate.js');
  const reader = await loadReader(o.model);
  for (const n of reader.report.notices) log(`note: ${n}`);
  const records = await loadRecords(o.data, log);
  const bar = countProgress('reading');
  const decoded = predictRecords({ params: reader.params, config: reader.config, tokenizer: reader.tokenizer }, records, {
    features: windowOptions(Number(o.maxLen), Number(o.stride), reader.config.maxPositions, log),
    decode: o.threshold !== undefined ? { nullThreshold: Number(o.threshold) } : {},
    onProgress: bar.update,
  });
  bar.stop();
  reader.params.dispose();
  return { records, decoded };
}

function common(cmd: Command): Command {
  return cmd
    .requiredOption('--model <dir>', 'a model directory: config.json, model.safetensors, vocab.txt or tokenizer.json')
    .requiredOption('--data <file>', 'questions (SQuAD JSON layout, JSONL or CSV)')
    .option('--max-len <n>', 'tokens per window', String(DEFAULT_FEATURE_OPTIONS.maxLen))
    .option('--stride <n>', 'context tokens shared by neighbouring windows', String(DEFAULT_FEATURE_OPTIONS.stride));
}

export function register(program: Command): void {
  common(program.command('eval').description('score a model directory on labelled questions (SQuAD 2.0 EM/F1)'))
    .option('--json', 'print one JSON object on the last line: {em, f1, total, answerable, unanswerable, threshold, tuned}')
    .action((o: ReadOptions) =>
      runCommand(async () => {
        const { buildReport, questionsFromRecords } = await import('../../eval/report.js');
        const { records, decoded } = await read(o);
        const report = buildReport(questionsFromRecords(records), decoded.predictions, { bestSpans: decoded.bestSpans, scoreDiffs: decoded.scoreDiffs });
        if (o.json) return printJson(scoresObject(report));
        const rows = [{ label: 'threshold 0', scores: report.summary }];
        if (report.tuned) rows.push({ label: `tuned ${report.tuned.threshold.toFixed(2)}`, scores: report.tuned.summary });
        process.stdout.write(`${scoresTable(rows)}\n`);
        const c = report.counts;
        process.stdout.write(`outcomes: ${c.correct} correct, ${c.partial} partial, ${c['wrong-span']} wrong span, ${c['false-no-answer']} answered nothing wrongly, ${c['false-answer']} answered an unanswerable question\n`);
        for (const w of readerWarnings(report.tuned?.summary ?? report.summary)) process.stdout.write(`${w}\n`);
      }),
    );

  common(program.command('predict').description('answer questions and write the id → answer map that `score` reads'))
    .requiredOption('--out <file>', 'predictions JSON: {question id: answer text, "" for no answer}')
    .option('--na-prob <file>', 'also write id → (null score − best span score), for `score --na-prob`')
    .option('--threshold <x>', 'answer nothing when the null score beats the best span by more than this', '0')
    .action((o: ReadOptions) =>
      runCommand(async () => {
        const { decoded } = await read(o);
        await writeFile(o.out!, `${JSON.stringify(decoded.predictions, null, 1)}\n`);
        if (o.naProb) await writeFile(o.naProb, `${JSON.stringify(decoded.scoreDiffs, null, 1)}\n`);
        const n = Object.keys(decoded.predictions).length;
        const empty = Object.values(decoded.predictions).filter((p) => p === '').length;
        process.stdout.write(`wrote ${n} predictions (${empty} no-answer) to ${o.out}${o.naProb ? ` and score differences to ${o.naProb}` : ''}\n`);
      }),
    );
}
