// defines: Sentence, Word, splitSentences, sentenceWords — sentences and words of a
// passage with their offsets, for the practice-question makers of this folder.
//
// Sentences end at ".", "!" or "?" (closing quotes and brackets kept with them) followed
// by white space, and at blank lines or line breaks; a full stop after a short
// abbreviation ("e.g.", "No.", "approx.") or between digits does not end one. Words are
// runs of non-space characters with the punctuation at their edges cut off, so "08:15,"
// is the word "08:15" and "(VSF-OH-7)" is "VSF-OH-7". Offsets are UTF-16 code units into
// the passage (DEVELOPERS.md, "Records").

export interface Word {
  text: string;
  /** [start, end) in the passage */
  start: number;
  end: number;
}

export interface Sentence {
  /** [start, end) in the passage, trimmed */
  start: number;
  end: number;
  words: Word[];
}

/** Abbreviations whose full stop does not end a sentence (lowercased, without the stop). */
const ABBREVIATIONS = new Set(
  'e.g i.e etc approx no nos vol fig figs mr mrs ms dr st mt jr sr co inc ltd dept ref para min max cf vs al ca'.split(' '),
);

/** Sentences of `text`, in order, each with its words. */
export function splitSentences(text: string): Sentence[] {
  const out: Sentence[] = [];
  const push = (start: number, end: number) => {
    while (start < end && /\s/u.test(text[start]!)) start++;
    while (end > start && /\s/u.test(text[end - 1]!)) end--;
    if (end <= start) return;
    const words = sentenceWords(text, start, end);
    if (words.length > 0) out.push({ start, end, words });
  };
  let start = 0;
  for (const m of text.matchAll(/([.!?])["'”’)\]]*(?=\s)|\n/g)) {
    const end = m.index + m[0].length;
    if (m[0] !== '\n' && m[1] === '.') {
      // the word before the stop: an abbreviation or a single letter does not end the sentence
      const before = /(\S+)$/u.exec(text.slice(Math.max(start, m.index - 12), m.index));
      const word = (before?.[1] ?? '').replace(/^[("'“‘[]+/u, '').toLowerCase();
      if (ABBREVIATIONS.has(word) || /^\p{L}$/u.test(word)) continue;
    }
    push(start, m[0] === '\n' ? m.index : end);
    start = end;
  }
  push(start, text.length);
  return out;
}

/** Words of text[from, to), punctuation at their edges cut off; words of punctuation alone are dropped. */
export function sentenceWords(text: string, from = 0, to = text.length): Word[] {
  const out: Word[] = [];
  const part = text.slice(from, to);
  for (const m of part.matchAll(/\S+/gu)) {
    let s = m.index;
    let e = m.index + m[0].length;
    // leading: quotes, brackets; trailing: those and , ; : . ! ?
    while (s < e && /["'“”‘’([{]/u.test(part[s]!)) s++;
    while (e > s && /["'“”‘’)\]},;:.!?]/u.test(part[e - 1]!)) e--;
    // a trailing "'s" stays with its word; a lone apostrophe does not
    if (e > s && /[\p{L}\p{N}]/u.test(part.slice(s, e))) out.push({ text: part.slice(s, e), start: from + s, end: from + e });
  }
  return out;
}
