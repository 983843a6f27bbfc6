// defines: askedKinds, kindSpans — the answer-kind token type of the reader's
// 'words+sentence+kind' level: which kinds of span a question asks for (by its question
// word, rules of our own), and where the passage holds spans of those kinds (the answer
// candidates of src/practice/candidates.ts). A feature of this sort is the named-entity
// token feature of DrQA (Chen et al. 2017), narrowed to one bit: "this token lies in a
// span of the kind the question asks for".
//
// The rules read the question's first question word and the words right after it (for
// "what" and "which", past a copula and an article, up to three words before a function
// word: "What is the speed limit on …" reads "speed limit"):
//   what time, which hour                   → time
//   when                                    → time, date
//   what date / year / day / month          → date
//   how much                                → money, quantity, percent
//   how many                                → quantity, number
//   what percentage / share / proportion    → percent
//   how long / deep / far / soon / often …  → quantity, time
//   what speed / height / limit … (measure) → quantity
//   which extension / channel / code …      → number, code
//   who, whom, whose, where                 → name, phrase
// Anything else ("What is …", "Which vessel …") asks for no kind, and no token is marked.
// They make mistakes both ways; the reader learns how far to trust the bit.
import { answerCandidates, isFunctionWord, type AnswerKind } from '../practice/candidates.js';
import { splitSentences } from '../practice/sentences.js';

const COPULAS = new Set(['is', 'are', 'was', 'were']);
const ARTICLES = new Set(['the', 'a', 'an', 'its', 'her', 'his', 'their']);
const QUESTION_WORDS = new Set(['what', 'which', 'when', 'who', 'whom', 'whose', 'where', 'how']);
const DEGREE_WORDS = new Set('long deep far high wide heavy fast soon often old big tall large low early late'.split(' '));
const DATE_NOUNS = new Set('date year day month week weekday'.split(' '));
const TIME_NOUNS = new Set('time hour hours'.split(' '));
const SHARE_NOUNS = new Set('percentage percent share proportion fraction'.split(' '));
/** nouns whose value is a measured amount ("What speed…", "What wave height…") */
const MEASURE_NOUNS = new Set(
  'speed height depth weight limit length distance width draught draft wind crosswind temperature pressure load capacity duration delay interval period age size tonnage gap range rate frequency'.split(
    ' ',
  ),
);
/** nouns named by a number or code after them ("Which extension…", "What form…") */
const NUMBER_NOUNS = new Set(
  'extension channel number code sailing platform berth gate deck page section clause item line room bay pier stand version form phase level stage step grade class zone band article part unit table figure volume issue reference'.split(
    ' ',
  ),
);

/** The kinds of span `question` asks for; empty when its question word names none. */
export function askedKinds(question: string): Set<AnswerKind> {
  const words = question
    .toLowerCase()
    .replace(/[^\p{L}\p{N}\s]/gu, ' ')
    .split(/\s+/)
    .filter(Boolean);
  const out = new Set<AnswerKind>();
  const at = words.findIndex((w) => QUESTION_WORDS.has(w));
  if (at < 0) return out;
  const add = (...kinds: AnswerKind[]) => kinds.forEach((k) => out.add(k));
  const [w, next = ''] = words.slice(at, at + 2);
  // the noun a "what" or "which" asks about: the words after it, past a copula and an article
  // ("What is the speed limit …" reads "speed", "limit")
  let n = at + 1;
  if (COPULAS.has(words[n] ?? '')) n++;
  if (ARTICLES.has(words[n] ?? '')) n++;
  const nouns: string[] = [];
  for (; n < words.length && nouns.length < 3 && !isFunctionWord(words[n]!); n++) nouns.push(words[n]!);
  switch (w) {
    case 'when':
      add('time', 'date');
      break;
    case 'who':
    case 'whom':
    case 'whose':
    case 'where':
      add('name', 'phrase');
      break;
    case 'how':
      if (next === 'much') add('money', 'quantity', 'percent');
      else if (next === 'many') add('quantity', 'number');
      else if (DEGREE_WORDS.has(next)) add('quantity', 'time');
      break;
    default: // what, which
      if (TIME_NOUNS.has(nouns[0] ?? '')) add('time');
      else if (DATE_NOUNS.has(nouns[0] ?? '')) add('date');
      else if (SHARE_NOUNS.has(nouns[0] ?? '')) add('percent');
      else if (nouns.some((n) => MEASURE_NOUNS.has(n))) add('quantity');
      else if (nouns.some((n) => NUMBER_NOUNS.has(n))) add('number', 'code');
  }
  return out;
}

/** Character spans [start, end) of `text`'s answer candidates whose kind is in `kinds`, in order. */
export function kindSpans(text: string, kinds: ReadonlySet<AnswerKind>): Array<[number, number]> {
  const out: Array<[number, number]> = [];
  if (kinds.size === 0) return out;
  for (const sentence of splitSentences(text)) {
    for (const c of answerCandidates(text, sentence.words)) {
      if (kinds.has(c.kind)) out.push([sentence.words[c.first]!.start, sentence.words[c.last - 1]!.end]);
    }
  }
  return out;
}
