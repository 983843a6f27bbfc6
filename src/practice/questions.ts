// defines: writeQuestion, questionWord, WrittenQuestion — one practice question from one
// sentence and one answer candidate: cloze-to-question rules of our own, in the manner
// of the rule-based baselines of unsupervised question answering (Lewis et al. 2019,
// "Unsupervised Question Answering by Cloze Translation", ACL; from memory):
//
//   1. clause     the words of the answer's clause (the sentence cut at ";" and ":")
//   2. window     2–10 words on each side of the answer (seeded), so a question keeps
//                 part of its sentence, never all of it
//   3. remove     the answer and the words its question word takes over ("at" before a
//                 time, "extension" before a number)
//   4. front      the question word (by the answer's kind, questionWord below) goes first;
//                 an auxiliary before the answer moves after it ("When must copies be
//                 withdrawn"), otherwise the question word stays in place ("B202 reaches
//                 Harl Quay at what time?") or goes first without one, by a seeded choice
//   5. drop       about one in twelve of the other lower-case words is left out (seeded),
//                 as people leave words out when they ask
// The result reads like a terse question, not always a grammatical one; it trains where
// to look and what kind of span to mark, which is what a reader needs from it.

import { AUXILIARIES, FUNCTION_WORDS, type Candidate } from './candidates.js';
import type { Sentence } from './sentences.js';

export interface WrittenQuestion {
  question: string;
  /** the answer as it stands in the passage: [start, end) */
  start: number;
  end: number;
  /** sentence words the question kept (the question word not counted) */
  keptWords: number;
}

/** Words in a name that make it a person or a post ("Who"), lowercased. */
const PERSON_HINTS = new Set(
  (
    'officer manager master engineer superintendent captain director chief mate deckhand president secretary minister mr mrs ms dr ' +
    'sir lord lady king queen general governor senator judge clerk inspector supervisor coordinator controller steward purser ' +
    'crew staff driver pilot surveyor agent owner head lead nurse doctor physician technician operator attendant assistant'
  ).split(' '),
);

const capitalise = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

/**
 * The question word of a candidate: by its kind, the preposition it takes over and,
 * for names and phrases, whether its words name a person. `coin` in [0, 1) picks between
 * equivalent wordings. Returns the words and whether the answer should keep its lead
 * preposition ("How" answers "by a hydraulic winch").
 */
export function questionWord(
  c: Candidate,
  leadWord: string | undefined,
  answerWords: readonly string[],
  coin: number,
): { words: string; keepLead: boolean } {
  const lead = leadWord?.toLowerCase();
  const person = answerWords.some((w) => PERSON_HINTS.has(w.toLowerCase()));
  switch (c.kind) {
    case 'time':
      if (lead && lead !== 'at' && lead !== 'on' && lead !== 'in') return { words: `${lead} what time`, keepLead: false };
      return { words: coin < 0.5 ? 'what time' : 'when', keepLead: false };
    case 'date':
      if (lead === 'by' || lead === 'until' || lead === 'before' || lead === 'after' || lead === 'since')
        return { words: coin < 0.5 ? `${lead} when` : `${lead} what date`, keepLead: false };
      if (answerWords.length === 1) return { words: coin < 0.5 ? 'in what year' : 'when', keepLead: false };
      return { words: coin < 0.5 ? 'on what date' : 'when', keepLead: false };
    case 'money':
      return { words: 'how much', keepLead: false };
    case 'percent':
      return { words: coin < 0.5 ? 'what percentage' : 'what share', keepLead: false };
    case 'quantity': {
      const noun = c.noun ?? '';
      return { words: /s$/.test(noun) ? `how many ${noun}` : coin < 0.5 ? `how much ${noun}` : 'how much', keepLead: false };
    }
    case 'number':
    case 'code':
      if (c.noun) return { words: `${coin < 0.5 ? 'which' : 'what'} ${c.noun}`, keepLead: false };
      return { words: coin < 0.5 ? 'which code' : 'what', keepLead: false };
    case 'name':
      if (person) return { words: lead === 'by' ? 'by whom' : 'who', keepLead: false };
      if (lead && ['at', 'in', 'on', 'near', 'from', 'to', 'into'].includes(lead)) {
        if (lead === 'from' || lead === 'to') return { words: coin < 0.5 ? 'where' : `${lead} where`, keepLead: false };
        return { words: 'where', keepLead: false };
      }
      return { words: coin < 0.5 ? 'what' : 'which', keepLead: false };
    case 'phrase':
      if (lead === 'by' || lead === 'with')
        return person ? { words: lead === 'by' ? 'by whom' : 'with whom', keepLead: false } : { words: 'how', keepLead: true };
      if (person) return { words: 'who', keepLead: false };
      if (lead === 'in' || lead === 'on' || lead === 'at') return { words: coin < 0.5 ? 'where' : `${lead} what`, keepLead: false };
      if (lead) return { words: `${lead} what`, keepLead: false };
      return { words: 'what', keepLead: false };
  }
}

/**
 * One question about `candidate` in `sentence` of `text`, or null when too little of the
 * sentence is left to ask with. `random` is a seeded generator in [0, 1).
 */
export function writeQuestion(
  text: string,
  sentence: Sentence,
  candidate: Candidate,
  random: () => number,
  headIsName: boolean,
): WrittenQuestion | null {
  const words = sentence.words;
  const n = words.length;
  const ask = questionWord(
    candidate,
    candidate.lead > 0 ? words[candidate.first - candidate.lead]!.text : undefined,
    words.slice(candidate.first, candidate.last).map((w) => w.text),
    random(),
  );
  const answerFrom = ask.keepLead ? candidate.first - candidate.lead : candidate.first;
  const removeFrom = candidate.first - candidate.lead;
  const removeTo = candidate.last;
  // 1. clause: cut at ";" or ":" after a word
  const breaksAfter = (i: number) => /^\s*[;:]/u.test(text.slice(words[i]!.end, (words[i + 1]?.start ?? sentence.end) + 0));
  let clauseStart = removeFrom;
  while (clauseStart > 0 && !breaksAfter(clauseStart - 1)) clauseStart--;
  let clauseEnd = removeTo;
  while (clauseEnd < n && !breaksAfter(clauseEnd - 1)) clauseEnd++;
  // 2. window
  const left = 2 + Math.floor(random() * 9);
  const right = 2 + Math.floor(random() * 9);
  const before = words
    .slice(Math.max(clauseStart, removeFrom - left), removeFrom)
    .map((w, k, all) => ({ text: w.text, index: removeFrom - all.length + k }));
  const after = words.slice(removeTo, Math.min(clauseEnd, removeTo + right)).map((w, k) => ({ text: w.text, index: removeTo + k }));
  // 5. drop about one word in ten (never the question's only words)
  // only lower-case words go: names, numbers and codes are what a person keeps when asking
  const drop = (list: typeof before) => (list.length > 2 ? list.filter((w) => !/^\p{Ll}+$/u.test(w.text) || random() >= 0.08) : list);
  let kept = [...drop(before)];
  let tail = [...drop(after)];
  // never all of the sentence's other words: leave out the one farthest from the answer
  if (kept.length + tail.length >= n - (removeTo - removeFrom)) {
    if (tail.length >= kept.length && tail.length > 0) tail = tail.slice(0, -1);
    else kept = kept.slice(1);
  }
  if (kept.length + tail.length < 2) return null;
  // the sentence's first word loses its capital unless it starts a name
  const lowerHead = (w: { text: string; index: number }) =>
    w.index === 0 && !headIsName && /^\p{Lu}\p{Ll}*$/u.test(w.text) ? { ...w, text: w.text.toLowerCase() } : w;
  kept = kept.map(lowerHead);
  tail = tail.map(lowerHead);
  // 4. front the question word
  let parts: string[];
  if (kept.length === 0) parts = [ask.words, ...tail.map((w) => w.text)];
  else {
    const aux = kept.findIndex((w) => AUXILIARIES.has(w.text.toLowerCase()));
    if (aux >= 0 && aux > 0) {
      parts = [ask.words, kept[aux]!.text, ...kept.filter((_, k) => k !== aux).map((w) => w.text), ...tail.map((w) => w.text)];
    } else if (random() < 0.5) {
      parts = [...kept.map((w) => w.text), ask.words, ...tail.map((w) => w.text)];
    } else {
      parts = [ask.words, ...kept.map((w) => w.text), ...tail.map((w) => w.text)];
    }
  }
  // a question that ends in a function word reads as cut off: keep it, people write such questions too
  const question = `${capitalise(parts.join(' '))}?`;
  const start = words[answerFrom]!.start;
  const end = words[candidate.last - 1]!.end;
  return { question, start, end, keptWords: kept.length + tail.length };
}

/** True when the words are function words only: such a span is a poor answer. */
export function onlyFunctionWords(words: readonly string[]): boolean {
  return words.every((w) => FUNCTION_WORDS.has(w.toLowerCase()));
}
