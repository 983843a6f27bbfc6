// The Export screen's job folder for torch.distributed, in Debian's Chromium
// (playwright-core), on a fresh profile: import the demo questions, load a checkpoint
// folder as the base reader, set the training settings, press the job folder's button and
// download the one .zip it offers. The zip unpacks to one folder holding job.json (the
// Training screen's settings), the questions, the windows, the base (its config and
// vocabulary as loaded, its weights with the tensors it had), the program of jobs/torch/
// byte for byte (bundled at build time) and README.txt; one PyTorch process
// (Debian's python3-torch) takes two updates from it and writes a checkpoint. Across the
// run: no request to another origin, no console error.
//
// The reader is the 2-layer, hidden-32 checkpoint of tests/reference/fixtures/checkpoint,
// as in workbench.e2e.ts (32 positions, so windows of 32 tokens). The folder agreeing with
// `spanwright job` byte for byte is tests/session/torch-job.test.ts; the full torchrun
// round trip is tests/cli/job.test.ts. A screenshot of the screen goes to
// tests/e2e/artifacts/export-job.png (git-ignored). The workbench is built once for all
// e2e files (tests/e2e/build.ts).
import { execFile } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { mkdir, readFile, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { promisify } from 'node:util';
import { unzipSync } from 'fflate';
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readSafetensorsRaw } from '../../src/io/safetensors.js';
import { JOB_PROGRAM_FILES } from '../../src/io/torch-job.js';
import { startServer, type RunningServer } from '../../src/cli/serve.js';
import { openBrowser, type OpenBrowser } from './browser.js';
import { screen, setTrainingSettings, SMALL_RUN, waitForEngine } from './page-steps.js';

const run = promisify(execFile);
const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const FIXTURE = join(ROOT, 'tests/reference/fixtures/checkpoint');
const ARTIFACTS = join(ROOT, 'tests/e2e/artifacts');
const DEMO = join(ROOT, 'tiny-models/demo');
const PYTHON = '/usr/bin/python3';
const BASE_FILES = ['config.json', 'model.safetensors', 'vocab.txt'];

let server: RunningServer;
let browser: OpenBrowser;
let page: Page;
let unpacked: string;
const requests: string[] = [];
const consoleErrors: string[] = [];

beforeAll(async () => {
  server = await startServer({ port: 0 });
  browser = await openBrowser();
  browser.context.on('request', (r) => requests.push(r.url()));
  page = browser.context.pages()[0] ?? (await browser.context.newPage());
  page.on('console', (m) => {
    if (m.type() === 'error') consoleErrors.push(m.text());
  });
  page.on('pageerror', (e) => consoleErrors.push(`uncaught: ${e.message}`));
  unpacked = mkdtempSync(join(tmpdir(), 'spanwright-job-export-'));
});

afterAll(async () => {
  await browser?.close();
  await server?.close();
  if (unpacked) rmSync(unpacked, { recursive: true, force: true });
});

describe('the job folder on the Export screen', () => {
  let stem = '';
  /** the section's text, with the question counts it shows */
  let shownCounts = '';
  const files = new Map<string, Uint8Array>();

  it('downloads one .zip for the training questions, settings and base reader', async () => {
    await page.goto(server.url);
    await waitForEngine(page);
    await page.locator('#import-files').setInputFiles(join(DEMO, 'validation.jsonl'));
    await page.locator('.import-report[data-file="validation.jsonl"]').waitFor();
    await screen(page, 'reader');
    await page.locator('#model-files').setInputFiles(BASE_FILES.map((f) => join(FIXTURE, f)));
    await page.locator('#param-count').waitFor();
    await screen(page, 'training');
    await setTrainingSettings(page, { ...SMALL_RUN, epochs: 1 });

    await screen(page, 'export');
    const section = page.locator('#torch-job');
    // when to use it, and the two commands
    await expect(section.textContent()).resolves.toMatch(/more cores or (with )?GPUs/i);
    const commands = (await page.locator('#job-commands').textContent()) ?? '';
    expect(commands).toContain('torchrun --standalone --nproc_per_node 2 train_reader.py');
    expect(commands).toContain('torchrun --standalone --nproc_per_node 8 train_reader.py --device cuda');

    shownCounts = (await section.textContent()) ?? '';
    const link = page.locator('#downloads a[data-variant="torch-job"]');
    const alert = page.locator('export-screen [role="alert"]');
    await page.locator('#export-job').click();
    await link.or(alert).first().waitFor({ timeout: 60_000 });
    expect(await alert.allTextContents()).toEqual([]);
    const [download] = await Promise.all([page.waitForEvent('download'), link.click()]);
    expect(download.suggestedFilename()).toMatch(/^spanwright-torch-job-[a-z0-9-]+\.zip$/);
    stem = download.suggestedFilename().replace(/\.zip$/, '');
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: join(ARTIFACTS, 'export-job.png'), fullPage: true });
    for (const [name, bytes] of Object.entries(unzipSync(new Uint8Array(readFileSync(await download.path()))))) {
      expect(name.startsWith(`${stem}/`), `${name} in ${stem}.zip`).toBe(true);
      files.set(name.slice(stem.length + 1), bytes);
    }
  });

  it('unpacks to the folder `spanwright job` lays out', async () => {
    expect([...files.keys()].sort()).toEqual(
      [
        'job.json',
        'questions/train.json',
        'questions/validation.json',
        'windows.safetensors',
        ...BASE_FILES.map((f) => `base/${f}`),
        ...JOB_PROGRAM_FILES,
        'README.txt',
      ].sort(),
    );
    // the program as the repository has it, and the base as it was chosen: its config and
    // vocabulary as they were; its weights rewritten, as `spanwright job` does for this
    // checkpoint, which has no MLM head (cls.*) for the program to find — the tensors it
    // has go into the folder unchanged
    for (const name of JOB_PROGRAM_FILES)
      expect(Buffer.compare(Buffer.from(files.get(name)!), readFileSync(join(ROOT, 'jobs/torch', name))), name).toBe(0);
    for (const name of ['config.json', 'vocab.txt'])
      expect(Buffer.compare(Buffer.from(files.get(`base/${name}`)!), readFileSync(join(FIXTURE, name))), name).toBe(0);
    const job = JSON.parse(new TextDecoder().decode(files.get('job.json')!)) as {
      format: string;
      train: { maxLength: number; stride: number; batchSize: number; epochs: number };
      windows: { count: number };
      questions: { count: number };
      base: { weights: string; why: string };
    };
    expect(job.base.weights).toBe('rewritten');
    expect(job.base.why).toContain('cls.predictions');
    const chosen = readSafetensorsRaw(new Uint8Array(readFileSync(join(FIXTURE, 'model.safetensors'))), 'model.safetensors').tensors;
    const written = readSafetensorsRaw(files.get('base/model.safetensors')!, 'base/model.safetensors').tensors;
    for (const [name, t] of chosen) expect(written.get(name)?.data, name).toEqual(t.data);
    expect(job.format).toBe('spanwright-torch-job');
    // the Training screen's settings
    expect(job.train).toMatchObject({ maxLength: 32, stride: 4, batchSize: 4, epochs: 1 });
    const windows = readSafetensorsRaw(files.get('windows.safetensors')!, 'windows.safetensors').tensors;
    expect(windows.get('input_ids')!.shape).toEqual([job.windows.count, 32]);
    expect(job.questions.count).toBeGreaterThan(0);
    expect(shownCounts).toContain(`${job.questions.count} training`);
    // README.txt names the folder the zip unpacks to
    expect(new TextDecoder().decode(files.get('README.txt')!)).toContain(`${stem}/model`);
  });

  it('is a folder the PyTorch program trains', async () => {
    const folder = join(unpacked, stem);
    for (const [name, bytes] of files) {
      await mkdir(dirname(join(folder, name)), { recursive: true });
      await writeFile(join(folder, name), bytes);
    }
    const { stdout } = await run(PYTHON, ['train_reader.py', '--max-updates', '2'], {
      cwd: folder,
      env: { ...process.env, OMP_NUM_THREADS: '1' },
    });
    expect(stdout).toContain('stopped after update 2');
    const log = (await readFile(join(folder, 'log.jsonl'), 'utf8')).trim().split('\n');
    expect(log.length).toBe(2);
    for (const line of log) expect(Number.isFinite((JSON.parse(line) as { loss: number }).loss)).toBe(true);
  });

  it('made no request to another origin and logged no error', () => {
    const origin = new URL(server.url).origin;
    const foreign = requests.filter((u) => !u.startsWith('blob:') && !u.startsWith('data:') && new URL(u).origin !== origin);
    expect(foreign).toEqual([]);
    expect(consoleErrors).toEqual([]);
  });
});
