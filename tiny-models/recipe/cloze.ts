// defines: clozeQuestions — span-selection questions made mechanically from open text, for
// the second stage of the base recipe: the encoder, pretrained with masked-LM, learns to
// find the sentence of a passage that a question restates and to mark the span the
// question leaves out. This is span-selection pretraining (Glass et al. 2020, "Span
// Selection Pre-training for Question Answering", ACL), in a small form of our own:
//
//   1. passages   runs of consecutive sentences of one document, 50–180 words
//   2. answer     a run of 1–3 content words of one sentence that occurs once in the passage
//   3. question   that sentence with the answer replaced by "what", about a sixth of the
//                 other words dropped (seeded), ending in "?"
//   4. no answer  one question in six restates a sentence of another document
//                 instead, and is marked unanswerable
//
// The text is the recipe's open corpus (corpus.ts); the questions are training data for
// the base only, never a check of anything.
import { mulberry32 } from '../../src/data/random.js';
import type { QARecord } from '../../src/data/record.js';

const STOP = new Set(
  (
    'a an the and or but if of to in on at by for with from as is are was were be been being it its this that these those ' +
    'he she they we you i me him her them us my his their our your not no so than then there here which who whom whose what ' +
    'when where why how all any each some such can could would should may might must shall will do does did have has had ' +
    'upon into over under about after before again also only very more most other own same too just'
  ).split(' '),
);

const WORD = /^[A-Za-z][A-Za-z'-]{2,}$/;

interface Sentence {
  text: string;
  start: number;
}

function sentences(text: string): Sentence[] {
  const out: Sentence[] = [];
  const re = /[^.!?]+[.!?]+["')\]]*/g;
  for (let m = re.exec(text); m !== null; m = re.exec(text)) {
    const lead = m[0].length - m[0].trimStart().length;
    const s = m[0].trim();
    if (s.length > 0) out.push({ text: s, start: m.index + lead });
  }
  return out;
}

const wordCount = (s: string) => s.split(/\s+/).filter(Boolean).length;

/** Passages of consecutive sentences, 50–180 words, from one document's text. */
function passages(text: string): string[] {
  const out: string[] = [];
  let cur: string[] = [];
  let words = 0;
  for (const s of sentences(text.replace(/\s+/g, ' '))) {
    cur.push(s.text);
    words += wordCount(s.text);
    if (words >= 50 + ((out.length * 37) % 130)) {
      out.push(cur.join(' '));
      cur = [];
      words = 0;
    }
  }
  if (words >= 50) out.push(cur.join(' '));
  return out.filter((p) => wordCount(p) <= 220);
}

function restate(sentence: string, answer: string | null, random: () => number): string {
  const words = sentence.replace(/[.!?"')\]]+$/, '').split(/\s+/);
  const answerWords = answer ? answer.split(' ') : [];
  const out: string[] = [];
  for (let i = 0; i < words.length; i++) {
    if (answer && words.slice(i, i + answerWords.length).join(' ') === answer) {
      out.push('what');
      i += answerWords.length - 1;
      continue;
    }
    if (random() < 1 / 6) continue;
    out.push(words[i]!);
  }
  return `${out.join(' ')}?`;
}

/** `count` questions over passages of `documents` (id, text), seeded. */
export function clozeQuestions(documents: ReadonlyArray<{ id: string; text: string }>, count: number, seed: number): QARecord[] {
  const random = mulberry32(seed);
  const pool = documents.flatMap((d) => passages(d.text).map((text, p) => ({ id: `${d.id}:${p}`, doc: d.id, text })));
  if (pool.length < 2) throw new Error('clozeQuestions: the corpus has fewer than two passages');
  const out: QARecord[] = [];
  let tries = 0;
  let noAnswer = 0;
  while (out.length < count && tries < count * 20) {
    tries++;
    const passage = pool[Math.floor(random() * pool.length)]!;
    const ss = sentences(passage.text).filter((s) => wordCount(s.text) >= 8 && wordCount(s.text) <= 40);
    if (ss.length === 0) continue;
    const id = `cloze-${seed}-${out.length}`;
    if (noAnswer < (out.length + 1) / 6) {
      // 4. a sentence of another document: nothing in this passage answers it
      const other = pool[Math.floor(random() * pool.length)]!;
      if (other.doc === passage.doc) continue;
      const os = sentences(other.text).filter((s) => wordCount(s.text) >= 8 && wordCount(s.text) <= 40);
      if (os.length === 0) continue;
      const s = os[Math.floor(random() * os.length)]!;
      out.push({
        id,
        passageId: passage.id,
        context: passage.text,
        question: restate(s.text, null, random),
        answers: [],
        unanswerable: true,
      });
      noAnswer++;
      continue;
    }
    // 2. an answer: 1–3 content words that occur once in the passage
    const s = ss[Math.floor(random() * ss.length)]!;
    const words = s.text
      .replace(/[.,;:!?"'()[\]]/g, ' ')
      .split(/\s+/)
      .filter(Boolean);
    const len = 1 + Math.floor(random() * 3);
    const at = Math.floor(random() * Math.max(1, words.length - len));
    const span = words.slice(at, at + len);
    if (
      span.length === 0 ||
      !span.every((w) => WORD.test(w)) ||
      STOP.has(span[0]!.toLowerCase()) ||
      STOP.has(span[span.length - 1]!.toLowerCase())
    )
      continue;
    const answer = span.join(' ');
    const inSentence = s.text.indexOf(answer);
    if (inSentence < 0) continue;
    const start = s.start + inSentence;
    if (passage.text.indexOf(answer) !== start || passage.text.lastIndexOf(answer) !== start) continue;
    // 3. the question
    out.push({
      id,
      passageId: passage.id,
      context: passage.text,
      question: restate(s.text, answer, random),
      answers: [{ text: answer, start }],
      unanswerable: false,
    });
  }
  return out;
}
