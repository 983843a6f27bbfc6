// defines: parseSquad, writeSquad — the SQuAD JSON layout, versions 1.1 and 2.0.
//
// The layout as published with SQuAD 2.0 (Rajpurkar, Jia, Liang 2018, "Know What You
// Don't Know"), from memory:
//   { "version": "v2.0", "data": [ { "title": "...", "paragraphs": [ { "context": "...",
//     "qas": [ { "id": "...", "question": "...", "answers": [{"text", "answer_start"}],
//                "is_impossible": false, "plausible_answers": [...] } ] } ] } ] }
// SQuAD 1.1 has no `is_impossible`: every question there is answerable, and the same
// reader handles both (a missing `is_impossible` means answerable).
// Not kept: `plausible_answers` (a record has no place for them) and unknown keys.
// Passage ids: `<title>/p<index>`, see passage-id.ts; a paragraph's own `passage_id`
// (a Spanwright extension) wins when present.
import type { QARecord } from '../record.js';
import { squadPassageId, usableTitle } from '../passage-id.js';
import { parseJson } from '../json-syntax.js';
import { fileProblem, isObject, type FieldNames, type ParseResult, type RawRecord } from './raw.js';

/** Reads SQuAD JSON text (already decoded) into raw records. */
export function parseSquad(text: string, file: string): ParseResult {
  const parsed = parseJson(text);
  if (!parsed.ok) {
    return {
      raw: [],
      problems: [fileProblem(file, 'syntax', `JSON syntax error at line ${parsed.line}, column ${parsed.column}: ${parsed.message}`)],
    };
  }
  const top = parsed.value;
  if (!isObject(top) || !Array.isArray(top['data'])) {
    return {
      raw: [],
      problems: [
        fileProblem(
          file,
          'layout',
          'not the SQuAD layout: expected an object with a "data" list of articles' +
            (Array.isArray(top) ? ' (the file is a list; is it JSONL saved as .json?)' : ''),
          'data',
        ),
      ],
    };
  }
  const raw: RawRecord[] = [];
  const problems: ParseResult['problems'] = [];
  const articles = top['data'] as unknown[];
  let count = 0; // questions seen, valid or not: the next record index

  const titleCount = new Map<string, number>();
  for (const a of articles) {
    const t = isObject(a) ? usableTitle(a['title']) : null;
    if (t !== null) titleCount.set(t, (titleCount.get(t) ?? 0) + 1);
  }

  articles.forEach((article, ai) => {
    const at = `data[${ai}]`;
    if (!isObject(article) || !Array.isArray(article['paragraphs'])) {
      problems.push(fileProblem(file, 'layout', 'an article must be an object with a "paragraphs" list', `${at}.paragraphs`));
      return;
    }
    const title = article['title'];
    const shared = (titleCount.get(usableTitle(title) ?? '') ?? 0) > 1;
    (article['paragraphs'] as unknown[]).forEach((paragraph, pi) => {
      const pat = `${at}.paragraphs[${pi}]`;
      if (!isObject(paragraph) || !Array.isArray(paragraph['qas'])) {
        problems.push(fileProblem(file, 'layout', 'a paragraph must be an object with a "qas" list', `${pat}.qas`));
        return;
      }
      const own = paragraph['passage_id'];
      const passageId = own !== undefined ? own : squadPassageId(title, ai, pi, shared);
      (paragraph['qas'] as unknown[]).forEach((qa, qi) => {
        const qat = `${pat}.qas[${qi}]`;
        const names: FieldNames = {
          id: `${qat}.id`,
          passageId: own !== undefined ? `${pat}.passage_id` : `${at}.title`,
          context: `${pat}.context`,
          question: `${qat}.question`,
          answers: `${qat}.answers`,
          unanswerable: `${qat}.is_impossible`,
          answer: (i, part) => `${qat}.answers[${i}].${part === 'text' ? 'text' : 'answer_start'}`,
        };
        const index = count++;
        if (!isObject(qa)) {
          problems.push({
            ...fileProblem(file, 'wrong-type', 'a question must be an object with id, question and answers', qat),
            record: index,
          });
          return;
        }
        const answers = qa['answers'];
        raw.push({
          index,
          where: '',
          names,
          id: qa['id'],
          passageId,
          context: paragraph['context'],
          question: qa['question'],
          answers: Array.isArray(answers) ? answers.map((x) => (isObject(x) ? { text: x['text'], start: x['answer_start'] } : x)) : answers,
          unanswerable: qa['is_impossible'],
        });
      });
    });
  });
  return { raw, problems };
}

/**
 * SQuAD 2.0 JSON for records. Articles group passages by the title part of their id
 * (`<title>/p<n>`; any other id is its own article), in first-seen order; questions keep
 * their order within a passage. A paragraph gets `passage_id` only where reading the
 * file back would derive a different id.
 */
export function writeSquad(records: readonly QARecord[]): string {
  const passages = new Map<string, { context: string; qas: unknown[] }>();
  for (const r of records) {
    let p = passages.get(r.passageId);
    if (!p) passages.set(r.passageId, (p = { context: r.context, qas: [] }));
    p.qas.push({
      id: r.id,
      question: r.question,
      answers: r.answers.map((a) => ({ text: a.text, answer_start: a.start })),
      is_impossible: r.unanswerable,
    });
  }
  const articles = new Map<string, Array<[string, { context: string; qas: unknown[] }]>>();
  for (const entry of passages) {
    const title = titleOf(entry[0]);
    let list = articles.get(title);
    if (!list) articles.set(title, (list = []));
    list.push(entry);
  }
  const data = [...articles].map(([title, list], ai) => ({
    title,
    paragraphs: list.map(([passageId, p], pi) => {
      const derived = squadPassageId(title, ai, pi, false);
      return derived === passageId ? p : { passage_id: passageId, ...p };
    }),
  }));
  return `${JSON.stringify({ version: 'v2.0', data }, null, 1)}\n`;
}

/** The article title a passage id names, or the id itself. */
function titleOf(passageId: string): string {
  const m = /^(.+)\/p\d+$/.exec(passageId);
  return m && usableTitle(m[1]) !== null ? m[1]! : passageId;
}
