// The browser workbench end to end, in Debian's Chromium (playwright-core), on a fresh
// profile: import the demo data, label a passage holding markup, load a checkpoint
// folder, train a few updates and watch the charts, reload mid-run and continue from the
// last checkpoint, pause, evaluate, draw a learning curve (three throwaway runs in the
// worker), ask over all passages and over one, export bundles (one .zip each, named
// apart) and parse the downloaded safetensors (and run the downloaded model.onnx in
// onnxruntime-node against the engine), export a saved checkpoint, open the app again offline, load
// the shipped base reader (tiny-models/base/), import a training and a validation file
// with the validation file kept as the validation set (after a reload too), and import
// the training file again to see the questions already present summed up in one line.
//
// Across the whole session it fails on any request to another origin, on console
// errors and uncaught page errors, and on a main-thread long task over 200 ms while a
// run trains (PerformanceObserver 'longtask'; 200 ms is this project's budget, the
// browser reports tasks over 50 ms). Screenshots of each screen go to
// tests/e2e/artifacts/ (git-ignored); with SPANWRIGHT_SCREENSHOTS=1 a few also go to
// tests/e2e/screenshots/ for the README.
//
// The reader is the 2-layer, hidden-32 checkpoint of tests/reference/fixtures/checkpoint
// (written by the PyTorch fixture generator): small enough that a few updates take
// seconds. Its 64-token vocabulary makes it a poor reader, and nothing here checks
// accuracy — only that every stage runs and hands real data to the next.
import { mkdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import * as ort from 'onnxruntime-node';
import { unzipSync } from 'fflate';
import type { Download, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CAUTION } from '../../src/io/model-card.js';
import { configFromHf, paramCount } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { readSafetensors } from '../../src/io/safetensors.js';
import { startServer, type RunningServer } from '../../src/cli/serve.js';
import { openBrowser, type OpenBrowser } from './browser.js';
import { screen, setTrainingSettings, SMALL_RUN, waitForEngine } from './page-steps.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const ARTIFACTS = join(ROOT, 'tests/e2e/artifacts');
const SCREENSHOTS = join(ROOT, 'tests/e2e/screenshots');
const FIXTURE = join(ROOT, 'tests/reference/fixtures/checkpoint');
const DEMO = join(ROOT, 'tiny-models/demo');
const SHIPPED = join(ROOT, 'tiny-models/base');
/** this project's budget for one main-thread task while training */
const LONG_TASK_MS = 200;

let server: RunningServer;
let browser: OpenBrowser;
let page: Page;
const requests: string[] = [];
const consoleErrors: string[] = [];
const longTasks: Array<{ start: number; duration: number }> = [];
/** [from, to] in the current page's performance.now() clock while a run trains */
let trainingSince: number | null = null;
/** checkpoints listed before the learning curve, which must add none */
let checkpointRows = 0;

async function now(): Promise<number> {
  return page.evaluate(() => performance.now());
}

/** Long tasks of the current page load inside the training window that just closed. */
async function collectLongTasks(from: number, to: number): Promise<void> {
  const tasks = await page.evaluate(() => (window as unknown as { __longTasks: Array<{ start: number; duration: number }> }).__longTasks);
  longTasks.push(...tasks.filter((t) => t.start + t.duration >= from && t.start <= to));
}

async function shot(name: string, forReadme = false): Promise<void> {
  await page.screenshot({ path: join(ARTIFACTS, `${name}.png`), fullPage: true });
  if (forReadme && process.env.SPANWRIGHT_SCREENSHOTS === '1') await page.screenshot({ path: join(SCREENSHOTS, `${name}.png`) });
}

async function chartPoints(id: string): Promise<number> {
  return Number((await page.locator(`#${id}`).getAttribute('data-points')) ?? '0');
}

/** A downloaded bundle's files by their names inside its one folder (fflate's unzipSync). */
async function unzipDownload(download: Download): Promise<Map<string, Uint8Array>> {
  const stem = download.suggestedFilename().replace(/\.zip$/, '');
  const entries = unzipSync(new Uint8Array(readFileSync(await download.path())));
  const files = new Map<string, Uint8Array>();
  for (const [name, bytes] of Object.entries(entries)) {
    expect(name.startsWith(`${stem}/`), `${name} in ${stem}.zip`).toBe(true);
    files.set(name.slice(stem.length + 1), bytes);
  }
  return files;
}

/** Exports the chosen reader as `variant` and downloads the bundle it offers. */
async function exportBundle(variant: string, reader: string): Promise<Download> {
  const link = page.locator(`#downloads a[data-variant="${variant}"][data-reader="${reader}"]`);
  const alert = page.locator('export-screen [role="alert"]');
  await page.locator(`#export-${variant}`).click();
  await link.or(alert).first().waitFor({ timeout: 60_000 });
  expect(await alert.allTextContents()).toEqual([]);
  const [download] = await Promise.all([page.waitForEvent('download'), link.click()]);
  return download;
}

beforeAll(async () => {
  mkdirSync(ARTIFACTS, { recursive: true });
  mkdirSync(SCREENSHOTS, { recursive: true });
  server = await startServer({ port: 0 });
  browser = await openBrowser();
  browser.context.on('request', (r) => requests.push(r.url()));
  await browser.context.addInitScript(() => {
    const w = window as unknown as { __longTasks: Array<{ start: number; duration: number }> };
    w.__longTasks = [];
    new PerformanceObserver((list) => {
      for (const e of list.getEntries()) w.__longTasks.push({ start: e.startTime, duration: e.duration });
    }).observe({ type: 'longtask', buffered: true });
  });
  page = browser.context.pages()[0] ?? (await browser.context.newPage());
  page.on('console', (m) => {
    if (m.type() === 'error') consoleErrors.push(m.text());
  });
  page.on('pageerror', (e) => consoleErrors.push(`uncaught: ${e.message}`));
});

afterAll(async () => {
  await browser?.close();
  await server?.close();
});

describe('the browser workbench', () => {
  it('starts cross-origin isolated with SIMD, its engine in a worker', async () => {
    await page.goto(server.url);
    await waitForEngine(page);
    expect(await page.evaluate(() => crossOriginIsolated)).toBe(true);
    await expect(page.locator('#isolation').textContent()).resolves.toContain('isolated');
    await expect(page.locator('#simd').textContent()).resolves.toContain('on');
    await expect(page.locator('#engine').textContent()).resolves.toContain('wasm + fast kernels');
    // the kernels' helper threads came up from this origin, one per core (src/kernels/threads.ts)
    const cores = await page.evaluate(() => navigator.hardwareConcurrency);
    await expect(page.locator('#threads').textContent()).resolves.toMatch(new RegExp(`threads: ${cores} of ${cores} cores`));
    // the offline cache takes control for the later offline check
    await page.evaluate(() => navigator.serviceWorker.ready.then(() => undefined));
  });

  it('imports the demo questions with a clean validation report', async () => {
    await page.locator('#import-files').setInputFiles(join(DEMO, 'validation.jsonl'));
    const report = page.locator('.import-report[data-file="validation.jsonl"]');
    await report.waitFor();
    const lines = readFileSync(join(DEMO, 'validation.jsonl'), 'utf8')
      .split('\n')
      .filter((l) => l.trim() !== '').length;
    await expect(report.textContent()).resolves.toMatch(new RegExp(`${lines} question\\(s\\) added,\\s+0 error\\(s\\)`));
    await expect(page.locator('#stat-questions').textContent()).resolves.toBe(String(lines));
    await shot('data', true);
  });

  it('shows markup inside a passage as text and never runs it', async () => {
    const markup = '<script>window.__injected = 1</script><img src="x" onerror="window.__injected = 2"> The night boat sails at 23:40.';
    await page.locator('summary', { hasText: 'Add a passage' }).click();
    await page.locator('#new-title').fill('markup test');
    await page.locator('#new-text').fill(markup);
    await page.locator('#add-passage').click();
    const box = page.locator('#passage-text');
    await expect(box.inputValue()).resolves.toBe(markup);
    // a question with no answer chosen: the message stands beside the button pressed
    await page.locator('#question-input').fill('Which tag opens the note?');
    await page.locator('#save-question').click();
    await expect(page.locator('#save-message').textContent()).resolves.toMatch(/Choose the answer first/);
    // label it from the keyboard, as the hint says: the text box takes the caret, Shift+arrows select, typing changes nothing
    await box.focus();
    await page.keyboard.press('Control+Home');
    for (let i = 0; i < '<script>'.length; i++) await page.keyboard.press('Shift+ArrowRight');
    await page.keyboard.type('typed');
    await expect(box.inputValue()).resolves.toBe(markup);
    await page.keyboard.press('Control+Home');
    for (let i = 0; i < '<script>'.length; i++) await page.keyboard.press('Shift+ArrowRight');
    await page.locator('#use-selection').click();
    await expect(page.locator('#answer-state .answer').textContent()).resolves.toBe('<script>');
    await page.locator('#save-question').click();
    const item = page.locator('ul.questions li', { hasText: 'Which tag opens the note?' });
    await item.waitFor();
    await expect(item.locator('.answer').textContent()).resolves.toBe('<script>');
    // the answer given is highlighted in the passage
    const marked = () =>
      page
        .locator('passage-labeller marked-passage')
        .evaluate((el) => [...el.shadowRoot!.querySelectorAll('mark.gold')].map((m) => m.textContent));
    await expect(marked()).resolves.toEqual(['<script>']);
    // undo of the add: the question goes, and so does the note, once nothing is left to undo
    await expect(page.locator('#undo-note').textContent()).resolves.toMatch(/Added “Which tag opens the note\?”/);
    await page.locator('#undo').click();
    await expect(item.count()).resolves.toBe(0);
    await expect(page.locator('#undo-note').count()).resolves.toBe(0);
    await expect(marked()).resolves.toEqual([]);
    // labelled again for the steps after this one
    await box.evaluate((el: HTMLTextAreaElement) => el.setSelectionRange(0, '<script>'.length));
    await page.locator('#use-selection').click();
    await page.locator('#question-input').fill('Which tag opens the note?');
    await page.locator('#save-question').click();
    await item.waitFor();
    const found = await page.evaluate(() => {
      const all: Element[] = [];
      const walk = (root: Document | ShadowRoot) => {
        for (const el of root.querySelectorAll('*')) {
          all.push(el);
          if (el.shadowRoot) walk(el.shadowRoot);
        }
      };
      walk(document);
      return {
        injected: (window as unknown as { __injected?: number }).__injected ?? null,
        scripts: all.filter((e) => e.tagName === 'SCRIPT' && e.textContent?.includes('__injected')).length,
        images: all.filter((e) => e.tagName === 'IMG').length,
      };
    });
    expect(found).toEqual({ injected: null, scripts: 0, images: 0 });
  });

  it('loads a checkpoint folder as the base reader', async () => {
    await screen(page, 'reader');
    await page.locator('#model-files').setInputFiles(['config.json', 'model.safetensors', 'vocab.txt'].map((f) => join(FIXTURE, f)));
    await page.locator('#param-count').waitFor();
    const config = JSON.parse(readFileSync(join(FIXTURE, 'config.json'), 'utf8')) as { hidden_size: number; num_hidden_layers: number };
    await expect(page.locator('#base-info').textContent()).resolves.toContain(
      `${config.num_hidden_layers} layers, hidden ${config.hidden_size}`,
    );
    await shot('base-reader', true);
  });

  it('writes practice questions from the training passages, shows a sample, and practises before fine-tuning', async () => {
    await screen(page, 'training');
    await expect(page.locator('#run-start-from').textContent()).resolves.toMatch(/starts from:\s+the base reader/);
    const fill = async (id: string, value: number) => {
      await page.locator(`#${id}`).fill(String(value));
      await page.locator(`#${id}`).dispatchEvent('change');
    };
    // folded until used
    await page.locator('#practice-fold > summary').click();
    // small settings: a short run that still writes questions of every kind
    await fill('practice-per-passage', 2);
    await fill('practice-max-len', 32); // the checkpoint folder loaded above has 32 positions
    // a few seconds of masked-LM on the passages first: the two steps run as one stage
    await fill('practice-domain-minutes', 0.05);
    await page.locator('#practice-preview').click();
    await page.locator('#practice-sample tbody tr').first().waitFor({ timeout: 60_000 });
    const rows = await page
      .locator('#practice-sample tbody tr')
      .evaluateAll((trs) => trs.map((tr) => [...tr.querySelectorAll('td')].map((td) => td.textContent?.trim() ?? '')));
    expect(rows.length).toBeGreaterThan(5);
    // every question is a question, and an answered one has its answer marked in the passage beside it
    for (const [question, answer] of rows) {
      expect(question).toMatch(/\?$/);
      expect(answer!.length).toBeGreaterThan(0);
    }
    const marked = await page
      .locator('#practice-sample marked-passage')
      .evaluateAll((els) => els.map((el) => el.shadowRoot?.querySelector('mark')?.textContent ?? null));
    const answers = rows.map((r) => r[1]);
    marked.forEach((m, i) => {
      if (answers[i] !== 'no answer') expect(m).toBe(answers[i]);
    });
    await page.locator('#practice-start').click();
    await page.locator('#run-status[data-status="running"]').waitFor({ timeout: 60_000 });
    await page
      .locator('#practice-done, #run-error')
      .first()
      .waitFor({ timeout: 180_000 })
      .catch(async (err) => {
        await shot('practice-timeout');
        throw err;
      });
    if ((await page.locator('#run-error').count()) > 0)
      throw new Error(`the practice run failed: ${await page.locator('#run-error').textContent()}`);
    await expect(page.locator('#run-status').getAttribute('data-status')).resolves.toBe('finished');
    await expect(page.locator('#run-start-from').textContent()).resolves.toMatch(/the practised reader/);
  });

  it('trains, survives a reload mid-run, continues from the checkpoint and pauses', async () => {
    await screen(page, 'training');
    await setTrainingSettings(page, { ...SMALL_RUN, epochs: 1, evalEvery: 3 });
    await expect(page.locator('#settings-error').count()).resolves.toBe(0);
    await page.locator('#start-run').click();
    trainingSince = await now();
    await page.waitForFunction(
      () =>
        Number(
          document
            .querySelector('spanwright-app')
            ?.shadowRoot?.querySelector('training-screen')
            ?.shadowRoot?.querySelector('#chart-loss')
            ?.getAttribute('data-points') ?? 0,
        ) >= 4,
      null,
      { timeout: 120_000 },
    );
    await page.locator('#run-status', { hasText: 'last checkpoint at update' }).waitFor({ timeout: 120_000 });
    expect(await chartPoints('chart-lr')).toBeGreaterThanOrEqual(4);
    expect(await chartPoints('chart-speed')).toBeGreaterThanOrEqual(4);
    await shot('training', true);
    await collectLongTasks(trainingSince, await now());

    // a reload kills the worker mid-run: the run must come back as interrupted
    await page.reload();
    await waitForEngine(page);
    // the screen it lands on says a run was interrupted, and leads to it
    await page.locator('#interrupted-banner').waitFor();
    await screen(page, 'training');
    // the practice stage is restored from its checkpoint as the reader fine-tuning starts from
    await expect(page.locator('#practice-done').count()).resolves.toBe(1);
    const resume = page.locator('#continue-run');
    await resume.waitFor();
    const label = (await resume.textContent()) ?? '';
    const step = Number(/update (\d+)/.exec(label)?.[1]);
    expect(step).toBeGreaterThan(0);
    await shot('training-interrupted');
    await resume.click();
    trainingSince = await now();
    await page.locator(`#run-status[data-status="running"]`).waitFor();
    await page.waitForFunction(
      (s) =>
        Number(
          document
            .querySelector('spanwright-app')
            ?.shadowRoot?.querySelector('training-screen')
            ?.shadowRoot?.querySelector('#run-status')
            ?.getAttribute('data-update') ?? 0,
        ) >=
        s + 3,
      step,
      { timeout: 120_000 },
    );
    await page.locator('#pause-run').click();
    await page.locator('#run-status[data-status="paused"]').waitFor({ timeout: 120_000 });
    await collectLongTasks(trainingSince, await now());
    await expect(page.locator('#resume-run').textContent()).resolves.toMatch(/Resume “run 1” from update \d+/);
    // the paused run's reader is in use, named on every screen
    const inUse = (await page.locator('#tuned-name').textContent())?.trim() ?? '';
    expect(inUse).toMatch(/^run 1, update \d+ \(unfinished\)$/);
    await expect(page.locator('#run-history tbody tr').count()).resolves.toBe(2); // the practice stage and run 1
  });

  it('asks before a new run replaces the fine-tuned reader in use, and shows Start and the charts at 1280×800', async () => {
    await page.setViewportSize({ width: 1280, height: 800 });
    // as a visit finds the screen: the folded settings folded (the steps above opened some)
    await screen(page, 'checkpoints');
    await screen(page, 'training');
    await page.evaluate(() => window.scrollTo(0, 0));
    const viewport = { width: 1280, height: 800 };
    for (const id of ['#start-run', '#chart-loss', '#chart-eval']) {
      const box = await page.locator(id).boundingBox();
      expect(box, id).not.toBeNull();
      expect(box!.y + Math.min(box!.height, 60), `${id} at ${box!.y}`).toBeLessThan(viewport.height);
    }
    // a chart shows the values at the update under the cursor, in its unit
    const chart = page.locator('#chart-eval .u-over');
    await chart.scrollIntoViewIfNeeded(); // the plot's lower part lies below 800 px
    const box = (await chart.boundingBox())!;
    let x = 0;
    await expect
      .poll(
        async () => {
          // wander over the plot, a few pixels at a time, as a hand would
          x = (x + 0.3) % 1;
          await page.mouse.move(box.x + box.width * (0.35 + x / 2), box.y + box.height / 2, { steps: 4 });
          return (await page.locator('#chart-eval .u-legend .u-value').allTextContents()).slice(1, 3).join(' | ');
        },
        { timeout: 10_000 },
      )
      .toMatch(/^\d+\.\d % \| \d+\.\d %$/); // EM | F1
    // the axes name their units (drawn on the canvas by uPlot; its axes' labels reflected in data-axes)
    await expect(page.locator('#chart-eval').getAttribute('data-axes')).resolves.toBe('optimizer update | percent');
    await expect(page.locator('#chart-loss').getAttribute('data-axes')).resolves.toBe('optimizer update | cross-entropy, nats');
    await page.evaluate(() => window.scrollTo(0, 0));
    await expect(page.locator('#run-name').inputValue()).resolves.toBe('run 2');
    const inUse = (await page.locator('#tuned-name').textContent())?.trim() ?? '';
    await page.locator('#start-run').click();
    const ask = page.locator('#confirm-new-run');
    await ask.waitFor();
    await expect(ask.textContent()).resolves.toContain(inUse);
    await expect(page.locator('#confirm-start').textContent()).resolves.toMatch(/Start “run 2” and replace it/);
    await shot('training-confirm');
    await page.locator('#cancel-start').click();
    await expect(ask.count()).resolves.toBe(0);
    // nothing started: the paused run and the reader in use are as they were
    await expect(page.locator('#run-status').getAttribute('data-status')).resolves.toBe('paused');
    await expect(page.locator('#tuned-name').textContent()).resolves.toContain(inUse);
    await page.setViewportSize({ width: 1280, height: 900 });
  });

  it('lists the checkpoints with their scores and storage', async () => {
    await screen(page, 'checkpoints');
    await page.locator('#checkpoint-table tbody tr').first().waitFor();
    checkpointRows = await page.locator('#checkpoint-table tbody tr').count();
    expect(checkpointRows).toBeGreaterThan(0);
    // the stages before fine-tuning kept their own checkpoints: pruning a run touches only its own
    const stages = new Set((await page.locator('#checkpoint-table tbody td.stage').allTextContents()).map((t) => t.trim()));
    expect([...stages].sort()).toEqual(['fine-tuning', 'masked-LM', 'practice']);
    // each row names its run: the fine-tuning checkpoints run 1's, the stages before it practice 1's
    const runs = await page
      .locator('#checkpoint-table tbody tr')
      .evaluateAll((rows) =>
        rows.map((r) => [r.querySelector('td.run')?.textContent?.trim(), r.querySelector('td.stage')?.textContent?.trim()]),
      );
    for (const [run, stage] of runs) expect(run).toBe(stage === 'fine-tuning' ? 'run 1' : 'practice 1');
    await expect(page.locator('#storage').textContent()).resolves.toMatch(/Checkpoints take\s+[\d.]+ MB/);
    // two ticked side by side: headed by stage and update, rows by names for people, never by ids or keys
    const boxes = page.locator('#checkpoint-table tbody input[type="checkbox"]');
    await boxes.nth(0).check();
    await boxes.nth(1).check();
    await page.locator('#comparison').waitFor();
    const heads = (await page.locator('#comparison thead th').allTextContents()).map((t) => t.trim()).filter((t) => t !== '');
    expect(heads.length).toBe(2);
    for (const h of heads) expect(h).toMatch(/^(fine-tuned|practice|masked-LM), update \d+$/);
    const comparison = (await page.locator('#comparison').textContent()) ?? '';
    for (const id of await page.locator('#checkpoint-table tbody tr').evaluateAll((rows) => rows.map((r) => r.getAttribute('data-id')!)))
      expect(comparison).not.toContain(id);
    expect(comparison).not.toMatch(/validationF1|learningRate|batchSize/);
    expect(comparison).toContain('Learning rate');
    expect(
      (await page
        .locator('#comparison tbody tr', { hasText: /^\s*Run/ })
        .first()
        .textContent()) ?? '',
    ).toMatch(/run 1|practice 1/);
    await shot('checkpoints');
  });

  it('evaluates base and fine-tuned readers side by side', async () => {
    await screen(page, 'evaluation');
    await page.locator('#evaluate').click();
    await page.locator('#question-table tbody tr').first().waitFor({ timeout: 120_000 });
    await page.locator('#evaluate:enabled').waitFor({ timeout: 120_000 }); // both readers scored
    const summary = (await page.locator('#eval-summary').textContent()) ?? '';
    expect(summary).toContain('F1, answerable');
    // the fine-tuned column is named by its run; progress is gone once both readers are scored
    await expect(page.locator('#eval-summary .reader-name').last().textContent()).resolves.toMatch(/^run 1, update \d+/);
    await expect(page.locator('#evaluate-progress').count()).resolves.toBe(0);
    // the base decodes neutrally; the fine-tuned reader with the cut and bonus its run chose on the training questions
    await expect(page.locator('#eval-summary .decoding-used').first().textContent()).resolves.toMatch(/^\s*0\.000, 0\s*$/);
    await expect(page.locator('#eval-summary .decoding-used').last().textContent()).resolves.toContain('chosen on its training questions');
    // a warning comparing base and fine-tuned says which row it compares
    for (const w of await page.locator('.reader-warning', { hasText: 'did not raise' }).allTextContents())
      expect(w).toContain('“F1, all” row');
    await page.locator('#misses-only').check();
    const outcomes = await page.locator('#question-table tbody tr').evaluateAll((rows) => rows.map((r) => r.getAttribute('data-outcome')));
    expect(outcomes.every((o) => o !== 'correct')).toBe(true);
    await page.locator('#question-table tbody tr summary').first().click();
    await shot('evaluation', true);
  });

  it('draws a learning curve on nested shares of the training questions and keeps no checkpoint', async () => {
    // the training split as the Data screen counts it (the demo questions plus the one labelled above)
    await screen(page, 'data');
    const trainQuestions = Number(/(\d+) training and/.exec((await page.locator('#split-counts').textContent()) ?? '')?.[1]);
    expect(trainQuestions).toBeGreaterThan(0);
    // a share takes whole passages until it reaches round(share × all), so it overshoots by less than one passage
    const perPassage = new Map<string, number>();
    for (const line of readFileSync(join(DEMO, 'validation.jsonl'), 'utf8')
      .split('\n')
      .filter((l) => l.trim() !== '')) {
      const id = (JSON.parse(line) as { passage_id: string }).passage_id;
      perPassage.set(id, (perPassage.get(id) ?? 0) + 1);
    }
    const largestPassage = Math.max(...perPassage.values());

    // the short windows and one epoch set on the Training screen above keep the three runs to seconds
    await screen(page, 'evaluation');
    const since = await now();
    // cancelled during its first share, a curve returns without a point and frees the worker
    await page.locator('#curve-start').click();
    await page.locator('#curve-progress', { hasText: /update \d+ of \d+/ }).waitFor({ timeout: 30_000 });
    await page.locator('#curve-cancel').click();
    await page.locator('#curve-cancelled').waitFor({ timeout: 30_000 });
    expect(await page.locator('learning-curve').getAttribute('data-points')).toBe('0');
    // then the whole curve
    await page.locator('#curve-start').click();
    await page.locator('#curve-progress').waitFor();
    await page.locator('learning-curve[data-status="done"], learning-curve[data-status="failed"]').waitFor({ timeout: 60_000 });
    await collectLongTasks(since, await now());
    expect(await page.locator('learning-curve [role="alert"]').allTextContents()).toEqual([]);
    const rows = await page.locator('#curve-table tbody tr').evaluateAll((trs) =>
      trs.map((tr) => ({
        share: Number(tr.getAttribute('data-share')),
        questions: Number(tr.getAttribute('data-questions')),
        f1: tr.getAttribute('data-f1'),
      })),
    );
    expect(rows.map((r) => r.share)).toEqual([0.25, 0.5, 1]);
    expect(rows[2]!.questions).toBe(trainQuestions);
    for (const r of rows.slice(0, 2)) {
      const target = Math.round(r.share * trainQuestions);
      expect(r.questions).toBeGreaterThanOrEqual(target);
      expect(r.questions).toBeLessThan(target + largestPassage);
    }
    expect(rows[0]!.questions).toBeLessThanOrEqual(rows[1]!.questions);
    for (const r of rows) {
      const f1 = Number(r.f1);
      expect(r.f1 !== null && r.f1 !== '' && Number.isFinite(f1) && f1 >= 0 && f1 <= 100, `F1 ${r.f1} of share ${r.share}`).toBe(true);
    }
    await expect(page.locator('learning-curve').getAttribute('data-points')).resolves.toBe('3');
    await page.locator('learning-curve #curve-plot canvas').first().waitFor();
    await shot('learning-curve');
    // the three runs were throwaway: the store holds what it held before
    await screen(page, 'checkpoints');
    await page.locator('#checkpoint-table tbody tr').first().waitFor();
    expect(await page.locator('#checkpoint-table tbody tr').count()).toBe(checkpointRows);
  });

  it('answers a question over all passages, with the caution on screen', async () => {
    await screen(page, 'ask');
    await expect(page.locator('#caution').textContent()).resolves.toContain(CAUTION);
    await page.locator('#ask-question').fill('When does the night boat sail?');
    await page.locator('#ask-button').click();
    await page.locator('#answers').waitFor({ timeout: 60_000 });
    expect(await page.locator('#answers ol.answers li').count()).toBeGreaterThan(0);
    await expect(page.locator('#score-help').textContent()).resolves.toMatch(/Reader:.*Retriever:.*Combined:/);
    await shot('ask', true);
  });

  it('answers over one passage by the reader alone, with no retriever score', async () => {
    await page.locator('ask-screen input[name="scope"][value="one"]').check();
    await page.locator('#ask-button').click();
    await page.locator('#answers[data-mode="single-passage"]').waitFor({ timeout: 60_000 });
    expect(await page.locator('#answers ol.answers li').count()).toBeGreaterThan(0);
    const text = (await page.locator('#answers').textContent()) ?? '';
    expect(text).not.toContain('BM25');
    expect(text).not.toMatch(/retriever \d|combined \d/i);
    await expect(page.locator('#score-help').textContent()).resolves.toMatch(/Reader:.*alone ranks/);
    await shot('ask-one-passage');
  });

  it("exports the fine-tuned model: one .zip per bundle, named apart; the safetensors parse, and model.onnx runs to the engine's logits", async () => {
    await screen(page, 'export');
    const fp32 = await exportBundle('fp32', 'tuned');
    expect(fp32.suggestedFilename()).toMatch(/^spanwright-fine-tuned-[a-z0-9-]+-float32\.zip$/);
    const fp32Files = await unzipDownload(fp32);
    expect([...fp32Files.keys()].sort()).toEqual(['MODEL_CARD.md', 'config.json', 'model.safetensors', 'vocab.txt']);
    expect(new TextDecoder().decode(fp32Files.get('MODEL_CARD.md'))).toContain(CAUTION);
    const exported = readSafetensors(fp32Files.get('model.safetensors')!, 'downloaded model.safetensors').tensors;
    const base = readSafetensors(new Uint8Array(readFileSync(join(FIXTURE, 'model.safetensors'))), 'fixture').tensors;
    const head = exported.get('qa_outputs.weight');
    expect(head?.shape).toEqual(base.get('qa_outputs.weight')?.shape);
    // training moved the span head away from the base weights
    const before = base.get('qa_outputs.weight')!.data;
    expect(head!.data.some((v, i) => v !== before[i])).toBe(true);
    // the float16 bundle of the same reader downloads under its own name: neither replaces the other
    const fp16 = await exportBundle('fp16', 'tuned');
    expect(fp16.suggestedFilename()).toMatch(/-float16\.zip$/);
    expect(fp16.suggestedFilename()).not.toBe(fp32.suggestedFilename());
    expect(fp16.suggestedFilename().replace(/float16\.zip$/, '')).toBe(fp32.suggestedFilename().replace(/float32\.zip$/, ''));
    const fp16Files = await unzipDownload(fp16);
    expect(fp16Files.get('model.safetensors')!.length).toBeLessThan(fp32Files.get('model.safetensors')!.length);
    expect(await page.locator('#downloads a[data-variant]').count()).toBe(2);
    // int8 weights are built in the worker too; the card measures them on the validation questions held here
    const int8Files = await unzipDownload(await exportBundle('int8', 'tuned'));
    expect(int8Files.has('model.int8.safetensors')).toBe(true);
    const int8Card = new TextDecoder().decode(int8Files.get('MODEL_CARD.md'));
    expect(int8Card).toMatch(/\| int8 \(dequantized\) \|/);
    expect(int8Card).not.toContain('not measured in this export');
    // model.onnx is built in the worker under the page's CSP (no 'unsafe-eval'); run by
    // onnxruntime-node (the reference ONNX runtime, npm `onnxruntime-node`) it gives the
    // engine's logits (tfjs cpu backend) for the fp32 weights downloaded above, within 1e-4
    const onnxFiles = await unzipDownload(await exportBundle('onnx', 'tuned'));
    const session = await ort.InferenceSession.create(onnxFiles.get('model.onnx')!, { logSeverityLevel: 3 });
    const ids = [2, 17, 33, 5, 9, 3, 41, 12, 60, 3, 2, 8, 8, 50, 3, 19, 0, 0, 0, 0]; // [2, 10], the second padded after 6
    const mask = ids.map((_, i) => (i < 16 ? 1 : 0));
    // the exported config.json: the practice stage turned the word-match token types on,
    // so context tokens carry types 2–4, which the ONNX graph must read like the engine
    const config = configFromHf(JSON.parse(new TextDecoder().decode(onnxFiles.get('config.json'))));
    expect(config.questionMatch).toBe('words+sentence');
    const types = ids.map((_, i) => (i % 10 >= 5 ? [1, 2, 3, 4, 1][(i % 10) - 5]! : 0));
    const feed = (v: number[]) => new ort.Tensor('int64', BigInt64Array.from(v.map(BigInt)), [2, 10]);
    const got = await session.run({ input_ids: feed(ids), attention_mask: feed(mask), token_type_ids: feed(types) });
    await session.release();
    await tf.setBackend('cpu');
    const { params } = ReaderParams.fromNamed(config, exported);
    const want = tf.tidy(() => {
      const int = (v: number[]) => tf.tensor2d(v, [2, 10], 'int32');
      const { start, end } = spanLogits(
        params,
        config,
        { inputIds: int(ids), attentionMask: int(mask), tokenTypeIds: int(types) },
        { training: false },
      );
      return { start: start.dataSync(), end: end.dataSync() };
    });
    params.dispose();
    for (const [name, engine] of [
      ['start_logits', want.start],
      ['end_logits', want.end],
    ] as const) {
      const onnx = got[name]!.data as Float32Array;
      expect(onnx.length).toBe(engine.length);
      expect(Math.max(...engine) - Math.min(...engine)).toBeGreaterThan(0.5); // something to compare: measured spread 2.1 (start), 1.6 (end)
      expect(Math.max(...onnx.map((v, i) => Math.abs(v - engine[i]!)))).toBeLessThan(1e-4);
    }
    await page.locator('#data-jsonl').click();
    await page.locator('a[data-file="dataset.jsonl"]').waitFor();
    await shot('export');
  });

  it('exports a saved checkpoint, not only the reader in use', async () => {
    const choice = page.locator('#export-model optgroup option').first();
    const value = (await choice.getAttribute('value')) ?? '';
    expect(value).toMatch(/^checkpoint:/);
    expect((await choice.textContent())?.trim()).toMatch(/^checkpoint: (fine-tuned|practice|masked-LM), update \d+/);
    await page.locator('#export-model').selectOption(value);
    const download = await exportBundle('fp32', 'checkpoint');
    expect(download.suggestedFilename()).toMatch(/^spanwright-(fine-tuned|practice|masked-lm)-update-\d+-[0-9-]*float32\.zip$/);
    const files = await unzipDownload(download);
    const card = new TextDecoder().decode(files.get('MODEL_CARD.md'));
    expect(card).toMatch(/checkpoint saved at update \d+/);
    expect(card).toContain(CAUTION);
    expect(readSafetensors(files.get('model.safetensors')!, 'checkpoint export').tensors.has('qa_outputs.weight')).toBe(true);
  });

  it('opens offline from its cache', async () => {
    await browser.context.setOffline(true);
    await page.reload();
    await waitForEngine(page);
    await browser.context.setOffline(false);
  });

  it('loads the shipped base reader, as large as tiny-models/base/config.json says', async () => {
    await screen(page, 'reader');
    // enabled once the build's precache.json lists the shipped files
    await page.locator('#use-shipped:enabled').waitFor({ timeout: 10_000 });
    const before = (await page.locator('#base-info h3').textContent()) ?? '';
    await page.locator('#use-shipped').click();
    await page.locator('#base-info h3').filter({ hasNotText: before }).waitFor({ timeout: 60_000 });
    expect(await page.locator('#base-error').count()).toBe(0);
    const want = paramCount(
      configFromHf(JSON.parse(readFileSync(join(SHIPPED, 'config.json'), 'utf8')), 'tiny-models/base/config.json'),
    ).total;
    const shown = Number(/^[\d,]+/.exec(((await page.locator('#param-count').textContent()) ?? '').trim())?.[0].replace(/,/g, ''));
    expect(shown).toBe(want);
    await shot('base-reader-shipped');
  });

  it('keeps an imported validation file as the validation set, marks each question, and keeps the choice after a reload', async () => {
    const count = (name: string) =>
      readFileSync(join(DEMO, name), 'utf8')
        .split('\n')
        .filter((l) => l.trim() !== '').length;
    const [train, validation] = [count('train.jsonl'), count('validation.jsonl')];
    const passageOf = (name: string) =>
      (JSON.parse(readFileSync(join(DEMO, name), 'utf8').split('\n', 1)[0]!) as { passage_id: string }).passage_id;
    await screen(page, 'data');
    page.once('dialog', (d) => void d.accept());
    await page.locator('#clear-dataset').click();
    await page.locator('#stat-questions', { hasText: /^0$/ }).waitFor();
    await page.locator('#split-mode-passage').check();

    await page.locator('#import-files').setInputFiles(join(DEMO, 'train.jsonl'));
    await page.locator('.import-report[data-file="train.jsonl"][data-role="train"]').waitFor();
    await page.locator('#import-validation').setInputFiles(join(DEMO, 'validation.jsonl'));
    const report = page.locator('.import-report[data-file="validation.jsonl"][data-role="validation"]');
    await report.waitFor();
    await expect(report.textContent()).resolves.toMatch(new RegExp(`${validation} question\\(s\\) added,\\s+0 error\\(s\\)`));
    // importing a validation file chose it as the validation set
    expect(await page.locator('#split-mode-file').isChecked()).toBe(true);
    const countsText = new RegExp(`^\\s*${train} training and\\s+${validation} validation questions`);
    await expect(page.locator('#split-counts').textContent()).resolves.toMatch(countsText);
    const stat = page.locator('#stat-split');
    await expect(stat.getAttribute('data-train')).resolves.toBe(String(train));
    await expect(stat.getAttribute('data-validation')).resolves.toBe(String(validation));
    await expect(stat.textContent()).resolves.toContain('validation as imported');
    // the question list marks each question's side
    const sides = () =>
      page.locator('passage-labeller ul.questions .side').evaluateAll((els) => els.map((e) => e.getAttribute('data-side')));
    await page.locator('#passage-select').selectOption(passageOf('validation.jsonl'));
    const validationSides = await sides();
    expect(validationSides.length).toBeGreaterThan(0);
    expect(new Set(validationSides)).toEqual(new Set(['validation']));
    await page.locator('#passage-select').selectOption(passageOf('train.jsonl'));
    expect(new Set(await sides())).toEqual(new Set(['training']));
    await shot('data-validation-file');

    // split by passage re-splits every question; the file's choice comes back on switching again
    await page.locator('#split-mode-passage').check();
    const byPassage = (await page.locator('#split-counts').textContent()) ?? '';
    const [, t, v] = /(\d+) training and\s+(\d+) validation/.exec(byPassage) ?? [];
    expect(Number(t) + Number(v)).toBe(train + validation);
    await expect(stat.textContent()).resolves.toContain('split by passage');
    await page.locator('#split-mode-file').check();
    await expect(page.locator('#split-counts').textContent()).resolves.toMatch(countsText);

    // kept in IndexedDB with the dataset
    await page.reload();
    await waitForEngine(page);
    await screen(page, 'data');
    expect(await page.locator('#split-mode-file').isChecked()).toBe(true);
    await expect(page.locator('#split-counts').textContent()).resolves.toMatch(countsText);
  });

  it('re-importing a file says in one line how many questions were already present, the details folded', async () => {
    const train = readFileSync(join(DEMO, 'train.jsonl'), 'utf8')
      .split('\n')
      .filter((l) => l.trim() !== '');
    const before = (await page.locator('#split-counts').textContent()) ?? '';
    await page.locator('#import-files').setInputFiles(join(DEMO, 'train.jsonl'));
    const report = page.locator('.import-report[data-file="train.jsonl"]');
    await report.waitFor();
    await expect(report.locator('p.note').textContent()).resolves.toMatch(/0 question\(s\) added, 0 error\(s\), 0 warning\(s\)/);
    const details = report.locator('details.already');
    await expect(details.locator('summary').textContent()).resolves.toBe(`${train.length} questions already present, skipped`);
    expect(await details.evaluate((d: HTMLDetailsElement) => d.open)).toBe(false);
    // nothing is listed outside the fold
    expect(await report.locator('ul.problems').count()).toBe(1);
    const firstId = (JSON.parse(train[0]!) as { id: string }).id;
    await details.locator('summary').click();
    await expect(details.locator('li').first().textContent()).resolves.toContain(`train.jsonl: record 1 (id ${firstId}), id: warning:`);
    expect(await details.locator('li').count()).toBe(Math.min(train.length, 500) + (train.length > 500 ? 1 : 0));
    await expect(page.locator('#split-counts').textContent()).resolves.toBe(before);
    await shot('data-reimport');
  });

  it('fits a 390×844 screen: no element reaches past the viewport, one row of screen buttons, badges that stay put', async () => {
    await page.setViewportSize({ width: 390, height: 844 });
    // the header's height before and after the engine reports: the badges keep their place
    await page.reload();
    await page.waitForFunction(() => document.querySelector('spanwright-app')?.shadowRoot?.querySelector('header') != null);
    const headerHeight = () =>
      page.locator('spanwright-app').evaluate((el) => el.shadowRoot!.querySelector('header')!.getBoundingClientRect().height);
    const before = await headerHeight();
    await waitForEngine(page);
    expect(await headerHeight()).toBe(before);
    for (const name of ['data', 'reader', 'training', 'checkpoints', 'evaluation', 'ask', 'export'] as const) {
      await screen(page, name);
      if (name === 'checkpoints') await page.locator('#checkpoint-table tbody tr').first().waitFor();
      if (name === 'training') await page.locator('#chart-loss').waitFor();
      // every element, inside shadow roots too, lies within the viewport's width, or inside a box that scrolls sideways and does
      const wide = await page.evaluate(() => {
        const width = document.documentElement.clientWidth;
        const scrolls = (el: Element) => ['auto', 'scroll'].includes(getComputedStyle(el).overflowX);
        /** an ancestor (across shadow roots) that scrolls sideways: its content may be wider than it */
        const inScroller = (el: Element): boolean => {
          for (let at: Element | null = el; ;) {
            const parent: Element | null = at.parentElement ?? ((at.getRootNode() as ShadowRoot).host as Element | undefined) ?? null;
            if (!parent) return false;
            if (scrolls(parent)) return true;
            at = parent;
          }
        };
        const out: string[] = [];
        const walk = (root: Document | ShadowRoot) => {
          for (const el of root.querySelectorAll('*')) {
            const r = el.getBoundingClientRect();
            if (r.width > 0 && (r.left < -0.5 || r.right > width + 0.5) && !inScroller(el))
              out.push(
                `<${el.tagName.toLowerCase()} id="${el.id}" class="${el.getAttribute('class') ?? ''}"> ${Math.round(r.left)}–${Math.round(r.right)}`,
              );
            if (el.shadowRoot) walk(el.shadowRoot);
          }
        };
        walk(document);
        return { out, page: document.documentElement.scrollWidth - width };
      });
      expect(wide.page, `${name}: the page scrolls sideways`).toBeLessThanOrEqual(0);
      expect(wide.out, `${name}: elements past the viewport`).toEqual([]);
      // the screen buttons: one row
      const rows = await page
        .locator('nav button')
        .evaluateAll((bs) => new Set(bs.map((b) => Math.round(b.getBoundingClientRect().top))).size);
      expect(rows, `${name}: rows of screen buttons`).toBe(1);
      await shot(`narrow-${name}`);
      if (name === 'training') await shot('narrow', true);
    }
    await page.setViewportSize({ width: 1280, height: 900 });
  });

  it('made no request to another origin, logged no error, and kept the page responsive while training', () => {
    const origin = new URL(server.url).origin;
    const foreign = requests.filter((u) => !u.startsWith('blob:') && !u.startsWith('data:') && new URL(u).origin !== origin);
    expect(foreign).toEqual([]);
    expect(consoleErrors).toEqual([]);
    expect(longTasks.filter((t) => t.duration > LONG_TASK_MS)).toEqual([]);
  });
});
