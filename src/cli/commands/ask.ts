// defines: the `ask` command — a question over a collection of passages: BM25 picks the
// passages most likely to hold the answer (src/retrieve/bm25.ts), the reader marks spans
// in each (src/eval/evaluate.ts), and the two scores are combined
// (src/retrieve/combine.ts). Each answer is shown inside its sentence.
import { readdir, stat } from 'node:fs/promises';
import { basename, join } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, readBytes, runCommand } from '../common.js';
import { readModelDir, startEngine } from '../../node/model-dir.js';
import { decodeText } from '../../data/decode.js';
import type { Passage } from '../../retrieve/bm25.js';
import { CAUTION } from '../../io/model-card.js';

interface AskOptions {
  model: string;
  passages: string;
  question: string;
  top: string;
  retrieve: string;
  retrieverWeight: string;
  json?: boolean;
}

/** Passages from a JSONL file ({id, text} per line, `title` optional) or a folder of .txt files. */
export async function readPassages(path: string): Promise<Passage[]> {
  let info;
  try {
    info = await stat(path);
  } catch {
    throw new UserError(`${path}: no such file or folder`);
  }
  const text = async (file: string) => {
    const decoded = decodeText(await readBytes(file));
    if (!decoded.ok) throw new UserError(`${file}: ${decoded.message}`);
    return decoded.text.replace(/\r\n?/g, '\n');
  };
  if (info.isDirectory()) {
    const names = (await readdir(path)).filter((n) => n.endsWith('.txt')).sort();
    if (names.length === 0) throw new UserError(`${path}: no .txt files in this folder`);
    return Promise.all(names.map(async (n) => ({ id: basename(n, '.txt'), text: await text(join(path, n)) })));
  }
  const lines = (await text(path)).split('\n');
  const passages: Passage[] = [];
  lines.forEach((line, i) => {
    if (line.trim() === '') return;
    let value: unknown;
    try {
      value = JSON.parse(line);
    } catch (err) {
      throw new UserError(`${path}: line ${i + 1} is not valid JSON (${(err as Error).message})`);
    }
    const v = value as { id?: unknown; text?: unknown };
    if (typeof v.text !== 'string' || v.text.trim() === '')
      throw new UserError(`${path}: line ${i + 1}, field "text": a passage needs non-empty text`);
    if (v.id !== undefined && typeof v.id !== 'string') throw new UserError(`${path}: line ${i + 1}, field "id": must be a string`);
    passages.push({ id: (v.id as string | undefined) ?? `line-${i + 1}`, text: v.text });
  });
  if (passages.length === 0) throw new UserError(`${path}: no passages`);
  return passages;
}

/** The sentence around [start, end) with the answer marked, on one line. */
export function inSentence(text: string, start: number, end: number, mark: (s: string) => string): string {
  const before = text.slice(0, start);
  const after = text.slice(end);
  const from = Math.max(before.search(/[^.!?\n]*$/), start - 200);
  const stop = after.search(/[.!?\n]/);
  const to = end + (stop < 0 ? Math.min(after.length, 200) : Math.min(stop + 1, 200));
  return `${text.slice(from, start)}${mark(text.slice(start, end))}${text.slice(end, to)}`.replace(/\s+/g, ' ').trim();
}

export function register(program: Command): void {
  program
    .command('ask')
    .description('answer a question from a collection of passages: BM25 retrieval, then the reader')
    .requiredOption('--model <dir>', 'a model directory')
    .requiredOption('--passages <path>', 'a JSONL file of {id, text} lines, or a folder of .txt files')
    .requiredOption('--question <text>', 'the question')
    .option('--top <n>', 'answers to show', '3')
    .option('--retrieve <n>', 'passages BM25 hands to the reader', '5')
    .option(
      '--retriever-weight <w>',
      'weight of the (min-max normalised) BM25 score in the combined score; the reader gets the rest',
      '0.5',
    )
    .option('--json', 'print the answers as one JSON object on the last line')
    .action((o: AskOptions) =>
      runCommand(async () => {
        const top = Number(o.top);
        const k = Number(o.retrieve);
        const w = Number(o.retrieverWeight);
        if (!Number.isInteger(top) || top < 1) throw new UserError(`--top must be a whole number above 0, not "${o.top}"`);
        if (!Number.isInteger(k) || k < 1) throw new UserError(`--retrieve must be a whole number above 0, not "${o.retrieve}"`);
        if (!(w >= 0 && w <= 1)) throw new UserError(`--retriever-weight must be between 0 and 1, not "${o.retrieverWeight}"`);
        if (o.question.trim() === '') throw new UserError('--question is empty');
        const passages = await readPassages(o.passages);
        await startEngine();
        const { ReaderSession } = await import('../../session/reader-session.js');
        const session = new ReaderSession();
        const files = await readModelDir(o.model);
        let result;
        try {
          session.loadBase({ name: o.model, files, names: files.names as { config: string; weights: string; vocab: string } });
          result = session.ask({ model: 'base', question: o.question, passages, topPassages: k, topAnswers: top, retrieverWeight: w });
        } catch (err) {
          throw new UserError((err as Error).message);
        } finally {
          session.dispose();
        }
        if (result.retrieved.length === 0) {
          if (o.json) return printJson({ question: o.question, answers: [] });
          process.stdout.write('no passage shares a word with the question\n');
          return;
        }
        const byId = new Map(passages.map((p) => [p.id, p]));
        const ranked = result.answers.map((a) => ({ ...a, charStart: a.contextStart + a.start, charEnd: a.contextStart + a.end }));
        if (o.json) return printJson({ question: o.question, answers: ranked, caution: CAUTION });
        const tty = process.stdout.isTTY === true;
        const mark = (s: string) => (tty ? `\x1b[1;4m${s}\x1b[0m` : `[[${s}]]`);
        ranked.forEach((a, i) => {
          process.stdout.write(`${i + 1}. ${a.text}\n`);
          process.stdout.write(
            `   passage ${a.passageId} | reader ${a.readerScore.toFixed(2)}` +
              (a.retrieverScore === null ? '' : ` | retriever ${a.retrieverScore.toFixed(2)} | combined ${a.combinedScore.toFixed(3)}`) +
              (a.noAnswerMargin > 0 ? ' | the reader leans towards "no answer here"' : '') +
              '\n',
          );
          process.stdout.write(`   ${inSentence(byId.get(a.passageId)!.text, a.charStart, a.charEnd, mark)}\n`);
        });
        process.stdout.write(
          '\nreader: start + end logit of the span; retriever: BM25 match of the passage to the question; combined: both scaled to 0–1 over these answers, weighted by --retriever-weight\n',
        );
        process.stdout.write(`\n${CAUTION}\n`);
      }),
    );
}
