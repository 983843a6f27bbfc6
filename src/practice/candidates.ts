// defines: AnswerKind, Candidate, answerCandidates, FUNCTION_WORDS, AUXILIARIES,
// isFunctionWord — the spans of one sentence that a practice question may ask for, each
// with its kind (which decides the question word) and, where a preposition or a
// counted noun belongs to the question rather than to the answer, how many words before
// the span the question takes over.
//
// Kinds, tried in this order on every word position (the first that matches wins, and a
// word belongs to at most one candidate):
//   time      08:15, 05:30, 7.45 am, noon, midnight
//   date      3 February 2025, February 3, 2025, July 1987, 1 October, a year 1000–2099
//   money     $40, £12.50, 40 dollars
//   percent   15%, 15 percent, 15 per cent
//   quantity  a number (digits or a number word) and the word after it: 1.6 metres,
//             25 knots, twelve passengers
//   code      a word of capitals and digits or hyphens: VSF-OH-7, HB-2, B202, LNK-4
//   number    a number after a counted noun: extension 2290, channel 71, Issue 14
//   name      a run of capitalised words (with "of", "and", "the", "for" inside):
//             the Marine Superintendent, Harl Quay, Vennick Sound Ferry Company
//   phrase    a determiner and up to four content words: a hydraulic winch, the second
//             deckhand, the first floor
// These are rules of our own over the surface of the text (no parser): they make mistakes,
// and a mistake costs one odd practice question, not a wrong label — every answer is an
// exact substring of its passage at its offset.

import type { Word } from './sentences.js';

export type AnswerKind = 'time' | 'date' | 'money' | 'percent' | 'quantity' | 'code' | 'number' | 'name' | 'phrase';

export interface Candidate {
  kind: AnswerKind;
  /** word indices [first, last) of the answer in its sentence */
  first: number;
  last: number;
  /** words just before `first` that the question word replaces ("at" before a time, "extension" before a number) */
  lead: number;
  /** the counted noun of a quantity or number, lowercased ("metres", "extension"), for "How many metres" */
  noun?: string;
}

/** English function words (our own list): never the content of a phrase answer. */
export const FUNCTION_WORDS = new Set(
  (
    'a an the of in on at to for from by with and or nor but not no is are was were be been being am do does did done has have had ' +
    'what which who whom whose when where why how this that these those it its as into onto than then there their they them ' +
    'his her hers he she we you your yours our ours i me my mine can could would should will shall may might must about ' +
    'such very any some all each every other another both either neither if so also only just too upon over under after before ' +
    'between through during without within until till while because though although up down out off here more most less least ' +
    'one ones same own s per via'
  ).split(' '),
);

/** Auxiliaries a question may bring to its front ("must printed copies be withdrawn …"). */
export const AUXILIARIES = new Set('is are was were has have had must can could will would should may might shall does do did'.split(' '));

const DETERMINERS = new Set('a an the its their his her our your this that these those each every'.split(' '));

/** Prepositions a time, date or place answer usually follows; the question word takes them over. */
const LEAD_PREPOSITIONS = new Set('at by until till from before after on in since during to into near'.split(' '));

const MONTHS = new Set(
  'january february march april may june july august september october november december jan feb mar apr jun jul aug sep sept oct nov dec'.split(
    ' ',
  ),
);

const NUMBER_WORDS = new Set(
  'two three four five six seven eight nine ten eleven twelve thirteen fourteen fifteen sixteen seventeen eighteen nineteen twenty thirty forty fifty sixty seventy eighty ninety hundred thousand million billion dozen'.split(
    ' ',
  ),
);

/** Nouns that are named by the number after them ("extension 2290", "Issue 14"). */
const COUNTED_NOUNS = new Set(
  'extension channel issue route platform berth gate deck page section chapter clause item line number room bay pier stand version form code phase level stage step grade class zone band article part unit table figure volume'.split(
    ' ',
  ),
);

export function isFunctionWord(word: string): boolean {
  return FUNCTION_WORDS.has(word.toLowerCase());
}

const DIGITS = /^\d[\d,]*(\.\d+)?$/;
const isNumber = (w: string) => DIGITS.test(w) || NUMBER_WORDS.has(w.toLowerCase());
const isYear = (w: string) => /^(1\d|20)\d\d$/.test(w);
const isDay = (w: string) => /^([12]?\d|3[01])(st|nd|rd|th)?$/.test(w);
const isMonth = (w: string) => MONTHS.has(w.toLowerCase()) && /^\p{Lu}/u.test(w);
const isCapitalised = (w: string) => /^\p{Lu}[\p{L}\d'’.-]*$/u.test(w);
const isCode = (w: string) => /^(?=.*\d)(?=.*\p{Lu})[\p{Lu}\d][\p{Lu}\d/-]*$/u.test(w) || /^\p{Lu}{2,}-[\p{Lu}\d-]+$/u.test(w);
/** Word-end punctuation in the sentence text between two words breaks a name or phrase ("Quay, Ostrey"). */
function joined(text: string, a: Word, b: Word): boolean {
  return /^\s+$/u.test(text.slice(a.end, b.start));
}

/**
 * Candidates of one sentence. `text` is the passage (words carry passage offsets), `words`
 * the sentence's words; returns candidates in word order, not overlapping.
 */
export function answerCandidates(text: string, words: readonly Word[]): Candidate[] {
  const out: Candidate[] = [];
  const w = words.map((x) => x.text);
  const lower = w.map((x) => x.toLowerCase());
  const next = (i: number) => (i + 1 < words.length && joined(text, words[i]!, words[i + 1]!) ? i + 1 : -1);
  const leadOf = (i: number) => (i > 0 && LEAD_PREPOSITIONS.has(lower[i - 1]!) ? 1 : 0);
  let i = 0;
  while (i < words.length) {
    const found = match(i);
    if (found) {
      out.push(found);
      i = found.last;
    } else i++;
  }
  return out;

  function match(i: number): Candidate | null {
    const word = w[i]!;
    const lw = lower[i]!;
    // time
    if (/^([01]?\d|2[0-3])[:.][0-5]\d$/.test(word) && (word.includes(':') || /^(am|pm|a\.m|p\.m)$/i.test(w[i + 1] ?? ''))) {
      let last = i + 1;
      if (next(i) > 0 && /^(am|pm|a\.m|p\.m|hours|hrs)$/i.test(w[i + 1]!)) last = i + 2;
      return { kind: 'time', first: i, last, lead: leadOf(i) };
    }
    if (lw === 'noon' || lw === 'midnight') return { kind: 'time', first: i, last: i + 1, lead: leadOf(i) };
    // date: day month [year] | month day[,] [year] | month year | year
    if (isDay(word) && next(i) > 0 && isMonth(w[i + 1]!)) {
      let last = i + 2;
      if (next(i + 1) > 0 && isYear(w[i + 2] ?? '')) last = i + 3;
      return { kind: 'date', first: i, last, lead: leadOf(i) };
    }
    if (isMonth(word) && lw !== 'may' && next(i) > 0) {
      const j = i + 1;
      if (isDay(w[j]!)) {
        let last = j + 1;
        if (isYear(w[j + 1] ?? '') && (joined(text, words[j]!, words[j + 1]!) || text.slice(words[j]!.end, words[j + 1]!.start) === ', '))
          last = j + 2;
        return { kind: 'date', first: i, last, lead: leadOf(i) };
      }
      if (isYear(w[j]!)) return { kind: 'date', first: i, last: j + 1, lead: leadOf(i) };
    }
    if (isYear(word) && !(i > 0 && COUNTED_NOUNS.has(lower[i - 1]!))) {
      return { kind: 'date', first: i, last: i + 1, lead: leadOf(i) };
    }
    // money
    if (/^[$£€]\d[\d,]*(\.\d+)?$/.test(word)) {
      const last = next(i) > 0 && /^(million|billion|thousand)$/.test(lower[i + 1]!) ? i + 2 : i + 1;
      return { kind: 'money', first: i, last, lead: 0 };
    }
    // percent
    if (/^\d[\d,]*(\.\d+)?%$/.test(word)) return { kind: 'percent', first: i, last: i + 1, lead: 0 };
    if (isNumber(word) && next(i) > 0 && lower[i + 1] === 'percent') return { kind: 'percent', first: i, last: i + 2, lead: 0 };
    if (isNumber(word) && next(i) > 0 && lower[i + 1] === 'per' && lower[i + 2] === 'cent')
      return { kind: 'percent', first: i, last: i + 3, lead: 0 };
    if (isNumber(word) && next(i) > 0 && /^(dollars|pounds|euros|cents|pence)$/.test(lower[i + 1]!))
      return { kind: 'money', first: i, last: i + 2, lead: 0 };
    // number after a counted noun ("extension 2290", "Issue 14"): the noun goes to the question
    if (DIGITS.test(word) && i > 0 && COUNTED_NOUNS.has(lower[i - 1]!) && joined(text, words[i - 1]!, words[i]!)) {
      return { kind: 'number', first: i, last: i + 1, lead: 1, noun: lower[i - 1]! };
    }
    // quantity: number + the word after it, when that word is a content word in lower case
    if (isNumber(word) && !(lw === 'one') && next(i) > 0) {
      const unit = w[i + 1]!;
      if (/^\p{Ll}[\p{Ll}-]*$/u.test(unit) && !FUNCTION_WORDS.has(unit) && !NUMBER_WORDS.has(unit)) {
        return { kind: 'quantity', first: i, last: i + 2, lead: 0, noun: unit };
      }
    }
    // code
    if (isCode(word) && word.length >= 2) {
      const lead =
        i > 0 && /^\p{Ll}+$/u.test(w[i - 1]!) && !FUNCTION_WORDS.has(lower[i - 1]!) && joined(text, words[i - 1]!, words[i]!) ? 1 : 0;
      return { kind: 'code', first: i, last: i + 1, lead, noun: lead ? lower[i - 1] : undefined };
    }
    // name: capitalised run; at the head of a sentence only when it is not a function word
    if (isCapitalised(word) && !MONTHS.has(lw) && !(i === 0 && FUNCTION_WORDS.has(lw))) {
      let last = i + 1;
      while (last < words.length && joined(text, words[last - 1]!, words[last]!)) {
        const n = w[last]!;
        if (isCapitalised(n) || /^\d+$/.test(n)) last++;
        else if (
          /^(of|and|the|for|de|van|von)$/.test(n) &&
          last + 1 < words.length &&
          isCapitalised(w[last + 1]!) &&
          joined(text, words[last]!, words[last + 1]!)
        )
          last += 2;
        else break;
      }
      if (i === 0 && last === 1) return null; // one capitalised word at the head: usually an ordinary word
      // "the Marine Superintendent": the article belongs with the name
      const first = i > 0 && lower[i - 1] === 'the' && joined(text, words[i - 1]!, words[i]!) ? i - 1 : i;
      return { kind: 'name', first, last, lead: first > 0 && LEAD_PREPOSITIONS.has(lower[first - 1]!) ? 1 : 0 };
    }
    // phrase: determiner + up to four content words (adjectives and nouns; no verbs can be told apart, so it stops at function words)
    if (DETERMINERS.has(lw) && next(i) > 0) {
      let last = i + 1;
      while (
        last < words.length &&
        last - i <= 4 &&
        /^\p{Ll}[\p{Ll}\d'’-]*$/u.test(w[last]!) &&
        !FUNCTION_WORDS.has(lower[last]!) &&
        !NUMBER_WORDS.has(lower[last]!)
      ) {
        // a word in -s or -ed followed by a determiner, a number or a preposition is most likely the verb: the phrase ends before it
        const after = lower[last + 1] ?? '';
        if (last > i + 1 && /(s|ed)$/.test(lower[last]!) && (DETERMINERS.has(after) || isNumber(after) || LEAD_PREPOSITIONS.has(after)))
          break;
        last++;
        if (last >= words.length || !joined(text, words[last - 1]!, words[last]!)) break;
      }
      if (last - i >= 2) return { kind: 'phrase', first: i, last, lead: i > 0 && LEAD_PREPOSITIONS.has(lower[i - 1]!) ? 1 : 0 };
    }
    return null;
  }
}
