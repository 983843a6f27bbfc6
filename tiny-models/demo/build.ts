// defines: the build of the demo domain data — handbook source files to the JSONL, SQuAD 2.0
// and passage files in tiny-models/demo/.
//
// Run: npx tsx tiny-models/demo/build.ts   (--draft: locate and check only, write nothing)
//
// Everything in the source is invented for the demo (see README.md); it is never a check of
// anything. The steps:
// 1. Read tiny-models/demo/source/*.md in name order and parse passages and questions.
// 2. Find each answer in its passage by search. An answer must occur exactly once, or, when
//    the source gives a context snippet ("A: text @ snippet"), the snippet must occur exactly
//    once in the passage and the answer exactly once in the snippet. Anything else stops the
//    build with the file, line, passage and question named.
// 3. Check ids, offsets, lengths, splits and the target counts.
// 4. Write train/validation as JSONL and SQuAD 2.0 with the project's exporter, read each
//    back with the project's reader, and write passages.jsonl and passages/*.txt for `ask`.
import { mkdirSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { QARecord } from '../../src/data/record.js';
import type { DataFormat } from '../../src/data/formats/detect.js';
import { parseDataset, writeDataset } from '../../src/data/load.js';
import { formatProblem } from '../../src/data/validate.js';

const HERE = dirname(fileURLToPath(import.meta.url));
const SOURCE_DIR = join(HERE, 'source');

/** Target counts from the demo brief; the build fails when the data misses one. */
const TARGETS = {
  minPassages: 45,
  maxPassages: 60,
  minWords: 100,
  maxWords: 500, // "100–500 words" per section
  minLongPassages: 8, // passages over `longWords` words, so 384-token windows matter
  longWords: 450,
  minQuestions: 360,
  minUnanswerableShare: 0.15,
  minValidation: 60,
  maxValidation: 80,
};

type Split = 'train' | 'validation';

interface SourceQuestion {
  line: number;
  question: string;
  /** undefined: unanswerable */
  answer?: string;
  /** optional snippet of the passage that holds the answer exactly once */
  snippet?: string;
}

interface SourcePassage {
  file: string;
  line: number;
  id: string;
  split: Split;
  title: string;
  text: string;
  questions: SourceQuestion[];
}

class BuildError extends Error {}

function fail(file: string, line: number, message: string): never {
  throw new BuildError(`${file}:${line}: ${message}`);
}

// 1. Parse. A passage starts at "## id | split | title"; its paragraphs follow, one per
//    line or several lines each, separated by blank lines; "### Questions" ends the text.
//    Question lines: "Q: question" then "A: answer" or "A: answer @ snippet"; "U: question"
//    is an unanswerable question. Lines before the first "##" are the file's header.
function parseSource(file: string, source: string): SourcePassage[] {
  const passages: SourcePassage[] = [];
  const lines = source.split(/\r?\n/);
  let current: SourcePassage | undefined;
  let paragraphs: string[][] = [];
  let inQuestions = false;
  let pending: SourceQuestion | undefined;

  const closeText = () => {
    if (!current) return;
    current.text = paragraphs
      .filter((p) => p.length > 0)
      .map((p) => p.join(' '))
      .join('\n\n');
    paragraphs = [];
  };
  const closePassage = (line: number) => {
    if (!current) return;
    if (pending) fail(file, pending.line, `question has no "A:" line: ${pending.question}`);
    if (!inQuestions) fail(file, line, `passage ${current.id} has no "### Questions" heading`);
    passages.push(current);
    current = undefined;
  };

  lines.forEach((raw, i) => {
    const lineNo = i + 1;
    const line = raw.trimEnd();
    const heading = /^## (\S+) \| (train|validation) \| (.+)$/.exec(line);
    if (heading) {
      closePassage(lineNo);
      current = {
        file,
        line: lineNo,
        id: heading[1]!,
        split: heading[2] as Split,
        title: heading[3]!.trim(),
        text: '',
        questions: [],
      };
      inQuestions = false;
      paragraphs = [[]];
      return;
    }
    if (line.startsWith('## ')) fail(file, lineNo, `bad passage heading (want "## id | train|validation | title"): ${line}`);
    if (!current) return; // file header
    if (line === '### Questions') {
      if (inQuestions) fail(file, lineNo, `second "### Questions" in passage ${current.id}`);
      closeText();
      inQuestions = true;
      return;
    }
    if (!inQuestions) {
      if (line.trim() === '') paragraphs.push([]);
      else paragraphs[paragraphs.length - 1]!.push(line.trim());
      return;
    }
    if (line.trim() === '') return;
    const tagged = /^([QAU]): (.+)$/.exec(line);
    if (!tagged) fail(file, lineNo, `expected "Q:", "A:" or "U:" in passage ${current.id}: ${line}`);
    const [, tag, body] = tagged as unknown as [string, 'Q' | 'A' | 'U', string];
    if (tag === 'Q' || tag === 'U') {
      if (pending) fail(file, pending.line, `question has no "A:" line: ${pending.question}`);
      const q: SourceQuestion = { line: lineNo, question: body.trim() };
      if (tag === 'Q') pending = q;
      current.questions.push(q);
      return;
    }
    if (!pending) fail(file, lineNo, `"A:" without a "Q:" before it in passage ${current.id}`);
    const at = body.indexOf(' @ ');
    pending.answer = (at < 0 ? body : body.slice(0, at)).trim();
    if (at >= 0) pending.snippet = body.slice(at + 3).trim();
    pending = undefined;
  });
  closePassage(lines.length);
  return passages;
}

/** Every index where `needle` starts in `haystack`, overlaps included. */
function occurrences(haystack: string, needle: string): number[] {
  const found: number[] = [];
  for (let at = haystack.indexOf(needle); at >= 0; at = haystack.indexOf(needle, at + 1)) found.push(at);
  return found;
}

// 2. Locate one answer.
function locate(p: SourcePassage, q: SourceQuestion): number {
  const where = `passage ${p.id}, question "${q.question}"`;
  const answer = q.answer!;
  if (q.snippet === undefined) {
    const hits = occurrences(p.text, answer);
    if (hits.length === 0) fail(p.file, q.line, `${where}: answer "${answer}" is not in the passage`);
    if (hits.length > 1) {
      fail(p.file, q.line, `${where}: answer "${answer}" occurs ${hits.length} times; add "@ snippet"`);
    }
    return hits[0]!;
  }
  const spots = occurrences(p.text, q.snippet);
  if (spots.length !== 1) {
    fail(p.file, q.line, `${where}: snippet "${q.snippet}" occurs ${spots.length} times (want 1)`);
  }
  const inner = occurrences(q.snippet, answer);
  if (inner.length !== 1) {
    fail(p.file, q.line, `${where}: answer "${answer}" occurs ${inner.length} times in its snippet (want 1)`);
  }
  return spots[0]! + inner[0]!;
}

/** The passage's questions as records; an answer that cannot be placed adds to `errors`. */
function toRecords(p: SourcePassage, errors: string[]): QARecord[] {
  return p.questions.map((q, i) => {
    let answers: QARecord['answers'] = [];
    if (q.answer !== undefined) {
      try {
        answers = [{ text: q.answer, start: locate(p, q) }];
      } catch (e) {
        if (!(e instanceof BuildError)) throw e;
        errors.push(e.message);
      }
    }
    return {
      id: `${p.id}-q${String(i + 1).padStart(2, '0')}`,
      passageId: p.id,
      context: p.text,
      question: q.question,
      answers,
      unanswerable: q.answer === undefined,
    };
  });
}

const wordCount = (text: string) => text.split(/\s+/).filter(Boolean).length;

// 3. Checks over the whole set.
function check(passages: SourcePassage[], records: Map<Split, QARecord[]>, draft: boolean): void {
  const problems: string[] = [];
  const passageIds = new Set<string>();
  for (const p of passages) {
    if (passageIds.has(p.id)) problems.push(`${p.file}:${p.line}: passage id ${p.id} used twice`);
    passageIds.add(p.id);
    const words = wordCount(p.text);
    if (words < TARGETS.minWords || words > TARGETS.maxWords) {
      problems.push(`${p.file}:${p.line}: passage ${p.id} has ${words} words (want ${TARGETS.minWords}–${TARGETS.maxWords})`);
    }
    const seen = new Set<string>();
    for (const q of p.questions) {
      if (seen.has(q.question)) problems.push(`${p.file}:${q.line}: passage ${p.id} asks "${q.question}" twice`);
      seen.add(q.question);
    }
  }
  const all = [...records.values()].flat();
  const ids = new Set<string>();
  for (const r of all) {
    if (ids.has(r.id)) problems.push(`record id ${r.id} used twice`);
    ids.add(r.id);
    for (const a of r.answers) {
      if (r.context.slice(a.start, a.start + a.text.length) !== a.text) {
        problems.push(`record ${r.id}: offset ${a.start} does not hold "${a.text}"`);
      }
      // a span must not cut a word: "four" found inside "fourteen" is a wrong answer
      const before = r.context[a.start - 1] ?? ' ';
      const after = r.context[a.start + a.text.length] ?? ' ';
      if (/[\p{L}\p{N}]/u.test(before) || /[\p{L}\p{N}]/u.test(after)) {
        problems.push(`record ${r.id}: answer "${a.text}" at ${a.start} starts or ends inside a word`);
      }
    }
    if (r.unanswerable !== (r.answers.length === 0)) problems.push(`record ${r.id}: unanswerable flag disagrees with answers`);
  }
  const trainPassages = new Set(records.get('train')!.map((r) => r.passageId));
  for (const r of records.get('validation')!) {
    if (trainPassages.has(r.passageId)) problems.push(`passage ${r.passageId} is in both splits`);
  }
  if (draft) {
    if (problems.length > 0) throw new BuildError(problems.join('\n'));
    return;
  }
  const long = passages.filter((p) => wordCount(p.text) > TARGETS.longWords).length;
  const unanswerable = all.filter((r) => r.unanswerable).length;
  const validation = records.get('validation')!.length;
  if (passages.length < TARGETS.minPassages || passages.length > TARGETS.maxPassages) {
    problems.push(`${passages.length} passages (want ${TARGETS.minPassages}–${TARGETS.maxPassages})`);
  }
  if (long < TARGETS.minLongPassages) problems.push(`${long} passages over ${TARGETS.longWords} words (want ≥ ${TARGETS.minLongPassages})`);
  if (all.length < TARGETS.minQuestions) problems.push(`${all.length} questions (want ≥ ${TARGETS.minQuestions})`);
  if (unanswerable / all.length < TARGETS.minUnanswerableShare) {
    problems.push(`unanswerable share ${(unanswerable / all.length).toFixed(3)} (want ≥ ${TARGETS.minUnanswerableShare})`);
  }
  if (validation < TARGETS.minValidation || validation > TARGETS.maxValidation) {
    problems.push(`${validation} validation questions (want ${TARGETS.minValidation}–${TARGETS.maxValidation})`);
  }
  if (problems.length > 0) throw new BuildError(problems.join('\n'));
}

// 4. Written by the project's exporter (src/data/load.ts) and read back by its reader: the
//    same records and no problems, so the demo files are known to load in the workbench
//    and the CLI.
function writeChecked(records: QARecord[], format: DataFormat, file: string): void {
  const text = writeDataset(records, format);
  const back = parseDataset(text, file, { format });
  const problems = back.problems.map(formatProblem);
  if (JSON.stringify(back.records) !== JSON.stringify(records)) problems.push(`${file}: records read back differ from those written`);
  if (problems.length > 0) throw new BuildError(problems.join('\n'));
  writeFileSync(join(HERE, file), text);
}

function main(): void {
  const files = readdirSync(SOURCE_DIR)
    .filter((f) => f.endsWith('.md'))
    .sort();
  if (files.length === 0) throw new BuildError(`${SOURCE_DIR}: no .md source files`);
  const passages = files.flatMap((f) => parseSource(join('source', f), readFileSync(join(SOURCE_DIR, f), 'utf8')));
  const records = new Map<Split, QARecord[]>([
    ['train', []],
    ['validation', []],
  ]);
  // every answer is placed before any error is raised, so one run names them all
  const errors: string[] = [];
  for (const p of passages) records.get(p.split)!.push(...toRecords(p, errors));
  if (errors.length > 0) throw new BuildError(errors.join('\n'));
  // --draft: check passages and offsets only, skip the target counts, write nothing
  const draft = process.argv.includes('--draft');
  check(passages, records, draft);
  if (draft) {
    for (const p of passages) console.log(`${p.id} ${p.split} ${wordCount(p.text)} words, ${p.questions.length} questions`);
    console.log(`draft: ${passages.length} passages, ${[...records.values()].flat().length} questions located`);
    return;
  }

  for (const split of ['train', 'validation'] as const) {
    const rs = records.get(split)!;
    writeChecked(rs, 'jsonl', `${split}.jsonl`);
    writeChecked(rs, 'squad', `${split}.squad.json`);
  }
  writeFileSync(
    join(HERE, 'passages.jsonl'),
    passages.map((p) => JSON.stringify({ id: p.id, title: p.title, text: p.text })).join('\n') + '\n',
  );
  const txtDir = join(HERE, 'passages');
  rmSync(txtDir, { recursive: true, force: true });
  mkdirSync(txtDir);
  for (const p of passages) writeFileSync(join(txtDir, `${p.id}.txt`), `${p.title}\n\n${p.text}\n`);

  const all = [...records.values()].flat();
  const count = (rs: QARecord[]) => `${rs.length} questions (${rs.filter((r) => r.unanswerable).length} unanswerable)`;
  const splitPassages = (s: Split) => passages.filter((p) => p.split === s).length;
  const words = passages.map((p) => wordCount(p.text));
  console.log(
    `passages: ${passages.length} (train ${splitPassages('train')}, validation ${splitPassages('validation')}); ` +
      `words ${Math.min(...words)}–${Math.max(...words)}, ${words.filter((w) => w > TARGETS.longWords).length} over ${TARGETS.longWords}`,
  );
  console.log(`all: ${count(all)}, unanswerable share ${(all.filter((r) => r.unanswerable).length / all.length).toFixed(3)}`);
  console.log(`train: ${count(records.get('train')!)}`);
  console.log(`validation: ${count(records.get('validation')!)}`);
}

try {
  main();
} catch (e) {
  if (!(e instanceof BuildError)) throw e;
  console.error(`demo build failed:\n${e.message}`);
  process.exitCode = 1;
}
