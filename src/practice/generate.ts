// defines: makePracticeQuestions, PracticePassage, PracticeOptions, PracticeResult,
// PracticeKind, DEFAULT_PRACTICE_OPTIONS — extractive questions written mechanically from
// a collection of passages that carry no labels, to give a reader reading practice
// before (or instead of) the user's labelled questions.
//
//   1. sentences   every passage cut into sentences and words (sentences.ts)
//   2. cloze       per sentence, its answer candidates (candidates.ts), each turned into
//                  a question (questions.ts): "cloze" questions
//   3. recurring   a span that recurs in a passage: the question is written around one
//                  occurrence, that sentence is taken out of the passage, and the answer
//                  is the occurrence left in it — recurring-span selection (Ram et al.
//                  2021, "Few-Shot Question Answering by Pretraining Span Selection",
//                  Splinter), written as a question rather than a masked passage
//   4. no answer   a share of the cloze questions is asked of a passage that does not
//                  hold the answer: the same passage with the question's sentence taken
//                  out, or the most word-sharing other passage; either way the answer's
//                  text occurs nowhere in that context
//   5. sample      at most `perPassage` questions per passage, drawn seeded, so long
//                  passages do not crowd out short ones
//
// Every answer is checked to be the exact text at its offset, and every no-answer
// context to lack the answer's text (case ignored) before a record leaves this file.

import { mulberry32, shuffleInPlace } from '../data/random.js';
import type { QARecord } from '../data/record.js';
import { answerCandidates, FUNCTION_WORDS, type AnswerKind } from './candidates.js';
import { onlyFunctionWords, writeQuestion } from './questions.js';
import { splitSentences, type Sentence } from './sentences.js';

export interface PracticePassage {
  id: string;
  text: string;
  /** passages of one group (one document, say) are each other's no-answer contexts; none = all passages are */
  group?: string;
}

export type PracticeKind = 'cloze' | 'recurring' | 'no-answer-removed' | 'no-answer-other';

export interface PracticeOptions {
  /** questions per passage at most, before the no-answer ones are added */
  perPassage: number;
  /** share of the answerable questions also asked of a context without the answer */
  unanswerableShare: number;
  /** share of a passage's questions that are recurring-span questions, where it has recurring spans */
  recurringShare: number;
  /** answers longer than this many words are not asked for */
  maxAnswerWords: number;
  seed: number;
}

export const DEFAULT_PRACTICE_OPTIONS: Readonly<PracticeOptions> = Object.freeze({
  // About as many as a person labels on a passage of a few hundred words, times five:
  // practice questions are cheap and the reader needs volume (our choice).
  perPassage: 40,
  // SQuAD 2.0's training set has about one unanswerable question in three (Rajpurkar
  // et al. 2018, from memory); a quarter of the answerable ones asked again gives ~20%.
  unanswerableShare: 0.25,
  // A minority: they are harder and rarer than cloze questions (our choice).
  recurringShare: 0.15,
  maxAnswerWords: 8,
  seed: 17,
});

export interface PracticeResult {
  records: QARecord[];
  /** the kind of each record, by record id */
  kinds: Map<string, PracticeKind>;
  /** answerable questions by answer kind */
  byAnswerKind: Partial<Record<AnswerKind, number>>;
  passages: number;
  /** passages that gave no question at all (too short, or no candidate) */
  emptyPassages: number;
}

/** Passages searched for a no-answer context: enough for a close one, few enough to stay linear. */
const MAX_PEERS = 200;

interface Draft {
  passage: PracticePassage;
  sentence: number;
  kind: 'cloze' | 'recurring';
  answerKind: AnswerKind;
  question: string;
  /** answer [start, end) in `context` */
  start: number;
  end: number;
  /** the context the answer sits in: the passage, or (recurring) the passage without the question's sentence */
  context: string;
  passageId: string;
}

const contentWords = (s: string) =>
  new Set([...s.toLowerCase().matchAll(/[\p{L}\p{N}]+/gu)].map((m) => m[0]).filter((w) => !FUNCTION_WORDS.has(w)));

/** The passage without sentence `s` (its following white space too), with the offset map for later text. */
function withoutSentence(text: string, s: Sentence): { text: string; cut: number; removed: number } {
  let end = s.end;
  while (end < text.length && /[ \t]/u.test(text[end]!)) end++;
  return { text: text.slice(0, s.start) + text.slice(end), cut: s.start, removed: end - s.start };
}

/** Whole-word occurrence of `needle` in `hay` from `from`, or -1. */
function wordIndexOf(hay: string, needle: string, from = 0): number {
  for (let at = hay.indexOf(needle, from); at >= 0; at = hay.indexOf(needle, at + 1)) {
    const before = at === 0 ? '' : hay[at - 1]!;
    const after = hay[at + needle.length] ?? '';
    if (!/[\p{L}\p{N}]/u.test(before) && !/[\p{L}\p{N}]/u.test(after)) return at;
  }
  return -1;
}

function clozeDrafts(passage: PracticePassage, sentences: Sentence[], random: () => number, opts: PracticeOptions): Draft[] {
  const out: Draft[] = [];
  sentences.forEach((sentence, si) => {
    if (sentence.words.length < 4) return;
    const candidates = answerCandidates(passage.text, sentence.words);
    const headIsName = candidates.some((c) => c.kind === 'name' && c.first === 0);
    for (const c of candidates) {
      if (c.last - c.first > opts.maxAnswerWords) continue;
      if (onlyFunctionWords(sentence.words.slice(c.first, c.last).map((w) => w.text))) continue;
      const q = writeQuestion(passage.text, sentence, c, random, headIsName);
      if (!q) continue;
      out.push({
        passage,
        sentence: si,
        kind: 'cloze',
        answerKind: c.kind,
        question: q.question,
        start: q.start,
        end: q.end,
        context: passage.text,
        passageId: passage.id,
      });
    }
  });
  return out;
}

/** Spans of 1–3 words that occur in two or more sentences of the passage, with at least one telling word. */
function recurringDrafts(passage: PracticePassage, sentences: Sentence[], random: () => number): Draft[] {
  const seen = new Map<string, Array<{ sentence: number; first: number; last: number }>>();
  sentences.forEach((s, si) => {
    for (let len = 1; len <= 3; len++) {
      for (let i = 0; i + len <= s.words.length; i++) {
        const span = s.words.slice(i, i + len);
        // words joined by white space only: no comma or stop inside a recurring span
        if (span.some((w, k) => k > 0 && !/^\s+$/u.test(passage.text.slice(span[k - 1]!.end, w.start)))) continue;
        const telling = span.some(
          (w) =>
            /\d/u.test(w.text) || (/^\p{Lu}/u.test(w.text) && i > 0) || (w.text.length >= 5 && !FUNCTION_WORDS.has(w.text.toLowerCase())),
        );
        if (!telling || FUNCTION_WORDS.has(span[0]!.text.toLowerCase()) || FUNCTION_WORDS.has(span[len - 1]!.text.toLowerCase())) continue;
        const key = passage.text.slice(span[0]!.start, span[len - 1]!.end);
        const list = seen.get(key) ?? [];
        if (!list.some((o) => o.sentence === si)) list.push({ sentence: si, first: i, last: i + len });
        seen.set(key, list);
      }
    }
  });
  const out: Draft[] = [];
  // longest recurring spans first: "Harl Quay" rather than "Quay"
  const keys = [...seen.keys()].filter((k) => seen.get(k)!.length >= 2).sort((a, b) => b.length - a.length || (a < b ? -1 : 1));
  const used = new Set<number>();
  for (const key of keys) {
    const occ = seen.get(key)!;
    const pick = occ[Math.floor(random() * occ.length)]!;
    if (used.has(pick.sentence)) continue;
    const sentence = sentences[pick.sentence]!;
    if (sentence.words.length < 5) continue;
    // only a span that is an answer candidate where it recurs: a part of a date or a name makes a poor question
    const typed = answerCandidates(passage.text, sentence.words).find((c) => c.first === pick.first && c.last === pick.last);
    if (!typed) continue;
    const q = writeQuestion(passage.text, sentence, typed, random, false);
    if (!q) continue;
    const cut = withoutSentence(passage.text, sentence);
    const at = wordIndexOf(cut.text, key);
    if (at < 0) continue;
    used.add(pick.sentence);
    out.push({
      passage,
      sentence: pick.sentence,
      kind: 'recurring',
      answerKind: typed.kind,
      question: q.question,
      start: at,
      end: at + key.length,
      context: cut.text,
      passageId: `${passage.id}~without-s${pick.sentence}`,
    });
  }
  return out;
}

/**
 * Practice questions for `passages`. Deterministic for the passages and the options.
 */
export function makePracticeQuestions(passages: readonly PracticePassage[], options: Partial<PracticeOptions> = {}): PracticeResult {
  const opts: PracticeOptions = { ...DEFAULT_PRACTICE_OPTIONS, ...options };
  if (!(opts.perPassage >= 1)) throw new RangeError(`practice questions: perPassage must be at least 1, got ${opts.perPassage}`);
  for (const share of ['unanswerableShare', 'recurringShare'] as const) {
    if (!(opts[share] >= 0 && opts[share] <= 1)) throw new RangeError(`practice questions: ${share} must be in [0, 1], got ${opts[share]}`);
  }
  const random = mulberry32(opts.seed);
  const records: QARecord[] = [];
  const kinds = new Map<string, PracticeKind>();
  const byAnswerKind: Partial<Record<AnswerKind, number>> = {};
  const split = passages.map((p) => ({ passage: p, sentences: splitSentences(p.text) }));
  const vocab = split.map(({ passage }) => contentWords(passage.text));
  // the passages each passage may borrow a no-answer context from: its group, at most MAX_PEERS of them around it
  const groups = new Map<string, number[]>();
  passages.forEach((p, i) => {
    const key = p.group ?? '';
    const list = groups.get(key) ?? [];
    list.push(i);
    groups.set(key, list);
  });
  const peers = passages.map((p, i) => {
    const list = groups.get(p.group ?? '')!;
    if (list.length <= MAX_PEERS) return list;
    const at = list.indexOf(i);
    const from = Math.max(0, Math.min(list.length - MAX_PEERS, at - MAX_PEERS / 2));
    return list.slice(from, from + MAX_PEERS);
  });
  let emptyPassages = 0;
  split.forEach(({ passage, sentences }, pi) => {
    // 2–3. drafts, 5. a seeded sample of them
    const cloze = shuffleInPlace(clozeDrafts(passage, sentences, random, opts), random);
    const recurring = shuffleInPlace(recurringDrafts(passage, sentences, random), random);
    const wantRecurring = Math.min(recurring.length, Math.round(opts.perPassage * opts.recurringShare));
    const drafts = [...recurring.slice(0, wantRecurring), ...cloze.slice(0, opts.perPassage - wantRecurring)];
    if (drafts.length === 0) emptyPassages++;
    drafts.forEach((d, k) => {
      const text = d.context.slice(d.start, d.end);
      const id = `${passage.id}#p${k}`;
      records.push({
        id,
        passageId: d.passageId,
        context: d.context,
        question: d.question,
        answers: [{ text, start: d.start }],
        unanswerable: false,
      });
      kinds.set(id, d.kind);
      byAnswerKind[d.answerKind] = (byAnswerKind[d.answerKind] ?? 0) + 1;
      // 4. the same question of a context without its answer
      if (d.kind !== 'cloze' || random() >= opts.unanswerableShare) return;
      const answer = text.toLowerCase();
      let context: string | null = null;
      let passageId = '';
      let kind: PracticeKind = 'no-answer-removed';
      if (random() < 0.5) {
        const cut = withoutSentence(passage.text, sentences[d.sentence]!);
        if (!cut.text.toLowerCase().includes(answer) && cut.text.trim().length > 0)
          [context, passageId] = [cut.text, `${passage.id}~without-s${d.sentence}`];
      }
      if (context === null && peers[pi]!.length > 1) {
        // the other passage that shares most of the question's content words
        const words = contentWords(d.question);
        let best = -1;
        let bestShared = -1;
        for (const j of peers[pi]!) {
          if (j === pi) continue;
          let shared = 0;
          for (const w of words) if (vocab[j]!.has(w)) shared++;
          if (shared > bestShared && !split[j]!.passage.text.toLowerCase().includes(answer)) [best, bestShared] = [j, shared];
        }
        if (best >= 0) [context, passageId, kind] = [split[best]!.passage.text, split[best]!.passage.id, 'no-answer-other'];
      }
      if (context === null) return;
      const nid = `${id}-none`;
      records.push({ id: nid, passageId, context, question: d.question, answers: [], unanswerable: true });
      kinds.set(nid, kind);
    });
  });
  // the promises of this file, checked
  for (const r of records) {
    for (const a of r.answers) {
      if (r.context.slice(a.start, a.start + a.text.length) !== a.text || a.text === '')
        throw new Error(`practice question ${r.id}: answer not at its offset (internal error)`);
    }
  }
  return { records, kinds, byAnswerKind, passages: passages.length, emptyPassages };
}
