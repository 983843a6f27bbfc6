// defines: the `eval` and `predict` commands — a model directory over a question file:
// SQuAD 2.0 EM/F1 (answerable and unanswerable apart, with the tuned no-answer
// threshold), or the id → answer map that `score` reads.
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { loadRecords, readModelDir, startEngine } from '../../node/model-dir.js';
import { writePathsAtomically } from '../../node/write-files.js';
import { countProgress } from '../progress.js';
import { readerWarnings } from '../../eval/reader-warnings.js';
import { scoresObject, scoresTable } from '../scores.js';
import { DEFAULT_WINDOWS } from '../../session/windows.js';

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

/** A session holding the model directory as its base reader, and the question file's records. */
async function open(o: ReadOptions) {
  await startEngine();
  const { ReaderSession } = await import('../../session/reader-session.js');
  const session = new ReaderSession();
  const files = await readModelDir(o.model);
  try {
    for (const n of session.loadBase({ name: o.model, files, names: files.names as { config: string; weights: string; vocab: string } })
      .notices)
      log(`note: ${n}`);
  } catch (err) {
    throw new UserError((err as Error).message);
  }
  const records = await loadRecords(o.data, log);
  const windows = { maxLength: whole('max-len', o.maxLen), stride: whole('stride', o.stride) };
  try {
    session.windows(windows, session.base, (note) => log(`note: ${note}`));
  } catch (err) {
    throw new UserError((err as Error).message.replace(/^maxLength/, '--max-len').replace(/^stride/, '--stride'));
  }
  return { session, records, windows };
}

function whole(name: string, v: string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isInteger(n) || n < 0) throw new UserError(`--${name} must be a whole number, not "${v}"`);
  return n;
}

function common(cmd: Command): Command {
  return cmd
    .requiredOption('--model <dir>', 'a model directory: config.json, model.safetensors, vocab.txt or tokenizer.json')
    .requiredOption('--data <file>', 'questions (SQuAD JSON layout, JSONL or CSV)')
    .option('--max-len <n>', `tokens per window (default ${DEFAULT_WINDOWS.maxLength}, or the model's positions if fewer)`)
    .option('--stride <n>', `context tokens shared by neighbouring windows (default ${DEFAULT_WINDOWS.stride}, less for short windows)`);
}

export function register(program: Command): void {
  common(program.command('eval').description('score a model directory on labelled questions (SQuAD 2.0 EM/F1)'))
    .option('--json', 'print one JSON object on the last line: {em, f1, total, answerable, unanswerable, threshold, bestCut, decoding}')
    .action((o: ReadOptions) =>
      runCommand(async () => {
        const { session, records, windows } = await open(o);
        const bar = countProgress('reading');
        let report;
        try {
          report = session.evaluate({ model: 'base', records, ...windows, onProgress: bar.update });
        } finally {
          bar.stop();
          session.dispose();
        }
        if (o.json) return printJson(scoresObject(report));
        const d = report.decoding;
        const rows = [
          {
            label: d.saved ? `saved cut ${d.nullThreshold.toFixed(2)}, kind bonus ${d.kindBonus}` : `threshold ${d.nullThreshold}`,
            scores: report.summary,
          },
        ];
        if (report.bestCut) rows.push({ label: `tuned ${report.bestCut.threshold.toFixed(2)}`, scores: report.bestCut.summary });
        process.stdout.write(`${scoresTable(rows)}\n`);
        const c = report.counts;
        process.stdout.write(
          `outcomes: ${c.correct} correct, ${c.partial} partial, ${c['wrong-span']} wrong span, ${c['false-no-answer']} answered nothing wrongly, ${c['false-answer']} answered an unanswerable question\n`,
        );
        for (const w of readerWarnings(report.bestCut?.summary ?? report.summary)) process.stdout.write(`${w}\n`);
      }),
    );

  common(program.command('predict').description('answer questions and write the id → answer map that `score` reads'))
    .requiredOption('--out <file>', 'predictions JSON: {question id: answer text, "" for no answer}')
    .option('--na-prob <file>', 'also write id → (null score − best span score), for `score --na-prob`')
    .option(
      '--threshold <x>',
      'answer nothing when the null score beats the best span by more than this (default: the cut saved with the model, else 0)',
    )
    .action((o: ReadOptions) =>
      runCommand(async () => {
        const { session, records, windows } = await open(o);
        const bar = countProgress('reading');
        let decoded;
        try {
          decoded = session.predict({
            model: 'base',
            records,
            ...windows,
            nullThreshold: o.threshold !== undefined ? Number(o.threshold) : undefined,
            onProgress: bar.update,
          });
        } finally {
          bar.stop();
          session.dispose();
        }
        // both files or neither, under temporary names first: a full disk names the file and
        // leaves an earlier predictions file as it was (src/node/write-files.ts)
        await writePathsAtomically([
          { path: o.out!, bytes: `${JSON.stringify(decoded.predictions, null, 1)}\n` },
          ...(o.naProb ? [{ path: o.naProb, bytes: `${JSON.stringify(decoded.scoreDiffs, null, 1)}\n` }] : []),
        ]);
        const n = Object.keys(decoded.predictions).length;
        const empty = Object.values(decoded.predictions).filter((p) => p === '').length;
        process.stdout.write(
          `wrote ${n} predictions (${empty} no-answer) to ${o.out}${o.naProb ? ` and score differences to ${o.naProb}` : ''}\n`,
        );
      }),
    );
}
