// <spanwright-app> — the workbench shell: a header with the engine's state (threads,
// SIMD), a row of screen buttons, and the current screen. It owns what several screens
// share — the dataset, the split, the base reader, the training settings, the training
// run and the last evaluations — keeps them in IndexedDB (workbench-db.ts), and talks to
// the engine worker (engine-client.ts). Screens get that state as properties and send
// changes back as events:
//   dataset-change {dataset}   split-change {split}      base-change {base}
//   settings-change {settings} run-start                 run-halt {mode: 'pause'|'stop'}
//   run-continue               tuned-change {name}       evaluated {result}
//   practice-start {settings}  practice-settings {settings}  practice-forget
// On start it marks a run that was `running` when the page went away as `interrupted`,
// so the training screen can offer to continue it from its last checkpoint.
import { LitElement, css, html } from 'lit';
import { customElement, state } from 'lit/decorators.js';
import { hashDataset } from '../src/data/hash.js';
import { chooseSplit, DEFAULT_SPLIT, type Split } from '../src/data/split.js';
import { liveHistory, type QuestionEdit } from '../src/session/edit-history.js';
import { nextRunName, recordRun, type RunSummary } from '../src/session/runs.js';
import { migrateStoredSettings, SETTINGS_VERSION } from '../src/session/stored-settings.js';
import { domainTrainSettings, practiceTrainSettings } from '../src/session/windows.js';
import { suggestedLearningRate, type TrainConfig } from '../src/train/config.js';
import type { LoopEvent } from '../src/train/loop.js';
import type { BaseInfo, DecodingChoice, EngineReady, EvaluationResult } from '../workers/protocol.js';
import { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import {
  emptyDataset,
  emptySeries,
  loadState,
  saveState,
  type Dataset,
  type RunRecord,
  type PracticeState,
  type SplitSettings,
  type StoredBase,
  type TunedState,
  storedDataset,
  storedSplit,
} from './workbench-db.js';
import { DEFAULT_PRACTICE, type PracticeSettings } from './practice-panel.js';
import './data-screen.js';
import './reader-screen.js';
import { START_SETTINGS } from './training-screen.js';
import './checkpoint-screen.js';
import './evaluation-screen.js';
import './ask-screen.js';
import './export-screen.js';

export type ScreenName = 'data' | 'reader' | 'training' | 'checkpoints' | 'evaluation' | 'ask' | 'export';

const SCREENS: ReadonlyArray<{ name: ScreenName; label: string }> = [
  { name: 'data', label: 'Data' },
  { name: 'reader', label: 'Base reader' },
  { name: 'training', label: 'Training' },
  { name: 'checkpoints', label: 'Checkpoints' },
  { name: 'evaluation', label: 'Evaluation' },
  { name: 'ask', label: 'Ask' },
  { name: 'export', label: 'Export' },
];

/** The smallest valid module using a SIMD instruction (v128 result, i8x16.splat), written from the WebAssembly spec. */
const SIMD_PROBE = new Uint8Array([
  0x00,
  0x61,
  0x73,
  0x6d,
  0x01,
  0x00,
  0x00,
  0x00, // magic, version 1
  0x01,
  0x05,
  0x01,
  0x60,
  0x00,
  0x01,
  0x7b, // type section: () -> v128
  0x03,
  0x02,
  0x01,
  0x00, // function section: one function of type 0
  0x0a,
  0x08,
  0x01,
  0x06,
  0x00,
  0x41,
  0x00,
  0xfd,
  0x0f,
  0x0b, // code: i32.const 0; i8x16.splat; end
]);

function simdSupported(): boolean {
  try {
    return WebAssembly.validate(SIMD_PROBE);
  } catch {
    return false;
  }
}

@customElement('spanwright-app')
export class SpanwrightApp extends LitElement {
  static override styles = [
    screenStyles,
    css`
      :host {
        max-width: 1200px;
        margin: 0 auto;
        padding: 0.75rem 1rem 3rem;
      }
      header {
        display: flex;
        flex-wrap: wrap;
        align-items: baseline;
        gap: 1rem;
        border-bottom: 2px solid var(--accent, #1f5f8b);
        padding-bottom: 0.5rem;
        margin-bottom: 0.75rem;
      }
      header h1 {
        font-size: 1.4rem;
        margin: 0;
      }
      .badges {
        display: flex;
        gap: 0.5rem;
        font-size: 0.85rem;
      }
      .badges {
        flex-wrap: wrap;
      }
      /* each badge keeps the width of its longest text from the first paint, so nothing moves once the engine reports */
      .badge {
        border: 1px solid var(--line, #ccc);
        border-radius: 999px;
        padding: 0.05rem 0.6rem;
        white-space: nowrap;
        display: inline-block;
        text-align: center;
      }
      #isolation {
        min-width: 9ch;
      }
      #threads {
        min-width: 15ch;
      }
      #simd {
        min-width: 7ch;
      }
      #engine {
        min-width: 21ch;
      }
      .badge.on {
        border-color: var(--good, #2d6a3e);
        color: var(--good, #2d6a3e);
      }
      nav {
        display: flex;
        flex-wrap: wrap;
        gap: 0.35rem;
        margin-bottom: 0.5rem;
      }
      .in-use {
        display: flex;
        flex-wrap: wrap;
        gap: 0.25rem 1.5rem;
        margin: 0 0 0.75rem;
        font-size: 0.9rem;
        color: var(--muted, #666);
      }
      .in-use strong {
        color: var(--ink, #222);
        font-weight: 600;
        overflow-wrap: anywhere;
      }
      /* narrow screens: the screens' buttons stay one row that scrolls sideways, never three rows */
      @media (max-width: 640px) {
        :host {
          padding: 0.5rem 0.6rem 2rem;
        }
        header .tagline {
          display: none;
        }
        /* two fixed rows of badges: a longer text after load is cut, not wrapped onto a new line */
        .badges {
          display: grid;
          grid-template-columns: 1fr 1fr;
          width: 100%;
        }
        .badge {
          min-width: 0 !important;
          overflow: hidden;
          text-overflow: ellipsis;
        }
        nav {
          flex-wrap: nowrap;
          overflow-x: auto;
          scrollbar-width: thin;
          padding-bottom: 0.2rem;
        }
        nav button {
          flex: none;
          padding: 0.3rem 0.6rem;
        }
      }
      nav button[aria-current='page'] {
        background: var(--accent, #1f5f8b);
        color: var(--accent-ink, #fff);
      }
    `,
  ];

  /** the screen on show */
  @state() private screen: ScreenName = 'data';
  /** the engine worker's report once it started; null before */
  @state() private ready: EngineReady | null = null;
  @state() private engineError = '';
  @state() private collection: Dataset = emptyDataset();
  /** by passage, or the questions imported as validation (src/data/split.ts) */
  @state() private splitSettings: SplitSettings = DEFAULT_SPLIT;
  @state() private baseInfo: BaseInfo | null = null;
  @state() private baseError = '';
  @state() private baseBusy = false;
  @state() private settings: TrainConfig = START_SETTINGS;
  @state() private run: RunRecord | null = null;
  /** the fine-tuned reader the worker holds, by name; null when there is none */
  @state() private tunedName: string | null = null;
  /** the labeller's undo steps (src/session/edit-history.ts), kept here so they outlive a change of screen; not over a reload */
  @state() private edits: QuestionEdit[] = [];
  /** every run started, newest first (src/session/runs.ts) */
  @state() private runs: RunSummary[] = [];
  /** said once on the Training screen when saved settings were moved to the true defaults */
  @state() private settingsNote: string | null = null;
  @state() private evaluations: { base?: EvaluationResult; tuned?: EvaluationResult } = {};
  /** the finished practice stage the worker's start reader comes from; null: the base */
  @state() private practice: PracticeState | null = null;
  @state() private practiceSettings: PracticeSettings = DEFAULT_PRACTICE;

  private readonly engine = new EngineClient();
  private readonly simd = simdSupported();
  private lastRunSave = 0;
  /** what the user asked of the running run, to tell a pause from a stop when it returns */
  @state() private haltMode: 'pause' | 'stop' | null = null;

  override connectedCallback(): void {
    super.connectedCallback();
    this.engine.onRunEvent((runId, event) => this._onRunEvent(runId, event));
    void this.start();
  }

  private async start(): Promise<void> {
    try {
      // ?threads=N lowers the kernel threads (default: every core, workers/engine-worker.ts)
      const threads = Number(new URLSearchParams(location.search).get('threads')) || undefined;
      this.ready = await this.engine.call({ kind: 'init', wasmBase: new URL('tfjs-wasm/', document.baseURI).href, threads });
    } catch (err) {
      this.engineError = (err as Error).message;
      return;
    }
    this.collection = storedDataset(await loadState('dataset'));
    this.splitSettings = storedSplit(await loadState('split'));
    const migrated = migrateStoredSettings(await loadState('settings'), await loadState('settingsVersion'));
    this.settings = { ...START_SETTINGS, ...migrated.settings };
    this.settingsNote = migrated.note;
    if (migrated.note) await saveState('settings', this.settings);
    await saveState('settingsVersion', SETTINGS_VERSION);
    this.runs = (await loadState('runs')) ?? [];
    const run = await loadState('run');
    if (run && run.status === 'running') {
      run.status = 'interrupted';
      await saveState('run', run);
      await this.noteRun(run);
    }
    this.run = run ?? null;
    this.practiceSettings = { ...DEFAULT_PRACTICE, ...((await loadState('practiceSettings')) ?? {}) };
    const base = await loadState('base');
    if (base) await this.loadBase(base, false);
    await this.restorePractice((await loadState('practice')) ?? null);
    await this.restoreTuned((await loadState('tuned')) ?? null);
    this.setAttribute('data-engine', 'ready');
  }

  /** Brings back the fine-tuned reader in use before the reload, from its checkpoint. */
  private async restoreTuned(tuned: TunedState | null): Promise<void> {
    if (!tuned || !this.baseInfo || tuned.baseName !== this.baseInfo.name) return;
    try {
      await this.engine.call({ kind: 'restore-checkpoint', id: tuned.checkpointId, decoding: tuned.decoding });
      this.tunedName = tuned.name;
    } catch {
      // its checkpoint was deleted or pruned: no fine-tuned reader until one is trained or restored
      await saveState('tuned', null);
    }
  }

  /** The fine-tuned reader in use is now `name`, held in checkpoint `checkpointId` (null: not kept over a reload). */
  private async setTuned(name: string | null, checkpointId: string | null, decoding?: DecodingChoice): Promise<void> {
    this.tunedName = name;
    this.evaluations = { base: this.evaluations.base };
    await saveState(
      'tuned',
      name && checkpointId && this.baseInfo
        ? { name, checkpointId, baseName: this.baseInfo.name, ...(decoding ? { decoding } : {}) }
        : null,
    );
  }

  /** The run's entry in the history, as it stands now. */
  private async noteRun(run: RunRecord): Promise<void> {
    const summary: RunSummary = {
      runId: run.runId,
      name: run.name ?? run.runId,
      stage: run.stage ?? 'fine-tune',
      status: run.status,
      startedAt: run.startedAt,
      update: run.update,
      totalUpdates: run.totalUpdates,
      baseName: run.baseName,
      ...(run.series.f1.length ? { lastF1: run.series.f1.at(-1)! } : {}),
      ...(run.status !== 'running' ? { endedAt: new Date().toISOString() } : {}),
    };
    this.runs = recordRun(this.runs, summary);
    await saveState('runs', this.runs);
  }

  /** Makes the worker's start reader the finished practice stage again (after a reload). */
  private async restorePractice(practice: PracticeState | null): Promise<void> {
    if (!practice || !this.baseInfo || practice.baseName !== this.baseInfo.name) {
      this.practice = null;
      return;
    }
    try {
      await this.engine.call({ kind: 'restore-checkpoint', id: practice.checkpointId });
      this.practice = practice;
    } catch {
      // its checkpoint was deleted on the Checkpoints screen: fine-tuning starts from the base
      this.practice = null;
      await saveState('practice', null);
    }
  }

  /** The one split every screen, training run and evaluation uses: chooseSplit under the user's choice. */
  private get split(): Split {
    if (this.collection.records.length === 0) return { train: [], validation: [] };
    return chooseSplit(this.collection.records, this.collection.validationIds, this.splitSettings);
  }

  private async loadBase(base: StoredBase, save: boolean): Promise<void> {
    this.baseBusy = true;
    this.baseError = '';
    try {
      // a copy goes to the worker: the stored bytes stay whole for the next reload
      const files = { ...base.files, safetensors: base.files.safetensors.slice() };
      this.baseInfo = await this.engine.call({ kind: 'load-base', name: base.name, files }, [files.safetensors.buffer]);
      this.tunedName = null;
      this.evaluations = {};
      if (save) await saveState('tuned', null);
      if (save) {
        await saveState('base', base);
        // a practice stage belongs to the base it was trained from
        this.practice = null;
        await saveState('practice', null);
        // a newly chosen reader starts from the learning rate suggested for its width
        this.settings = { ...this.settings, learningRate: suggestedLearningRate(this.baseInfo.config.hiddenSize) };
        await saveState('settings', this.settings);
      }
      // a window cannot be longer than the model's position table
      const limit = this.baseInfo.config.maxPositions;
      if (this.settings.maxLength > limit) {
        const maxLength = limit;
        const stride = Math.min(this.settings.stride, Math.floor(maxLength / 4));
        const maxQueryLength = Math.min(this.settings.maxQueryLength, Math.floor(maxLength / 3));
        this.settings = { ...this.settings, maxLength, stride, maxQueryLength };
        await saveState('settings', this.settings);
      }
    } catch (err) {
      this.baseError = (err as Error).message;
    } finally {
      this.baseBusy = false;
    }
  }

  override render() {
    const r = this.ready;
    const threadsOn = r !== null && r.threads > 1;
    const isolated = typeof crossOriginIsolated === 'boolean' && crossOriginIsolated;
    return html`
      <header>
        <h1>Spanwright</h1>
        <span class="muted tagline">adapt a question-answering reader to your documents, on this computer</span>
        <div class="badges" aria-live="polite">
          <span
            class="badge ${isolated ? 'on' : ''}"
            id="isolation"
            title="Cross-origin isolation lets WebAssembly share memory between threads"
          >
            ${isolated ? 'isolated' : 'not isolated'}
          </span>
          <span
            class="badge ${threadsOn ? 'on' : ''}"
            id="threads"
            title="Threads the training kernels use: every core unless ?threads=N in the address asks for fewer"
          >
            threads: ${r === null ? '…' : `${r.threads} of ${r.cores} cores`}
          </span>
          <span class="badge ${this.simd ? 'on' : ''}" id="simd">SIMD: ${this.simd ? (r?.relaxedSimd ? 'on, relaxed' : 'on') : 'off'}</span>
          <span
            class="badge ${r?.fastKernels ? 'on' : ''}"
            id="engine"
            title=${r === null ? 'the engine is starting' : `engine: ${r.backend}${r.fastKernels ? ' + fast kernels' : ''}`}
          >
            engine: ${this.engineError ? 'failed' : r === null ? 'starting…' : `${r.backend}${r.fastKernels ? ' + fast kernels' : ''}`}
          </span>
        </div>
      </header>
      ${this.engineError ? html`<p class="note bad" role="alert">The engine did not start: ${this.engineError}</p>` : ''}
      <nav aria-label="Screens">
        ${SCREENS.map(
          (s) =>
            html`<button
              data-screen=${s.name}
              aria-current=${s.name === this.screen ? 'page' : 'false'}
              @click=${() => this._onNavigate(s.name)}
            >
              ${s.label}
            </button>`,
        )}
      </nav>
      ${
        this.run?.status === 'interrupted' && this.screen !== 'training'
          ? html`<p class="note warn" id="interrupted-banner" role="status">
              The ${this.run.stage === 'practice' || this.run.stage === 'domain' ? 'practice' : 'training'} run
              “${this.run.name ?? this.run.runId}” was interrupted (the page was closed or reloaded while it trained).
              <button @click=${() => this._onNavigate('training')}>Continue it on the Training screen</button>
            </p>`
          : ''
      }
      <p class="in-use" id="reader-in-use" aria-live="polite">
        <span>Base reader: <strong>${this.baseInfo?.name ?? (this.baseBusy ? 'loading…' : 'none chosen')}</strong></span>
        <span>Fine-tuned reader in use: <strong id="tuned-name">${this.tunedName ?? 'none yet'}</strong></span>
      </p>
      <main>${this.renderScreen()}</main>
    `;
  }

  private renderScreen() {
    const split = this.split;
    switch (this.screen) {
      case 'data':
        return html`<data-screen
          .engine=${this.engine}
          .collection=${this.collection}
          .splitSettings=${this.splitSettings}
          .split=${split}
          .baseInfo=${this.baseInfo}
          .settings=${this.settings}
          .edits=${this.edits}
          @dataset-change=${this._onDatasetChange}
          @split-change=${this._onSplitChange}
        ></data-screen>`;
      case 'reader':
        return html`<reader-screen
          .engine=${this.engine}
          .baseInfo=${this.baseInfo}
          .baseError=${this.baseError}
          .busy=${this.baseBusy}
          .settings=${this.settings}
          .split=${split}
          @base-change=${this._onBaseChange}
        ></reader-screen>`;
      case 'training':
        return html`<training-screen
          .settings=${this.settings}
          .run=${this.run}
          .baseInfo=${this.baseInfo}
          .split=${split}
          .engine=${this.engine}
          .practice=${this.practice}
          .practiceSettings=${this.practiceSettings}
          .halting=${this.haltMode}
          .tunedName=${this.tunedName}
          .runs=${this.runs}
          .settingsNote=${this.settingsNote}
          @settings-change=${this._onSettingsChange}
          @practice-settings=${this._onPracticeSettings}
          @practice-start=${this._onPracticeStart}
          @practice-forget=${this._onPracticeForget}
          @run-start=${this._onRunStart}
          @run-halt=${this._onRunHalt}
          @run-continue=${this._onRunContinue}
        ></training-screen>`;
      case 'checkpoints':
        return html`<checkpoint-screen
          .engine=${this.engine}
          .baseInfo=${this.baseInfo}
          .tunedName=${this.tunedName}
          .running=${this.run?.status === 'running'}
          @tuned-change=${this._onTunedChange}
        ></checkpoint-screen>`;
      case 'evaluation':
        return html`<evaluation-screen
          .engine=${this.engine}
          .baseInfo=${this.baseInfo}
          .tunedName=${this.tunedName}
          .train=${split.train}
          .validation=${split.validation}
          .settings=${this.settings}
          .results=${this.evaluations}
          @evaluated=${this._onEvaluated}
        ></evaluation-screen>`;
      case 'ask':
        return html`<ask-screen
          .engine=${this.engine}
          .baseInfo=${this.baseInfo}
          .tunedName=${this.tunedName}
          .passages=${this.collection.passages}
          .settings=${this.settings}
        ></ask-screen>`;
      case 'export':
        return html`<export-screen
          .engine=${this.engine}
          .baseInfo=${this.baseInfo}
          .tunedName=${this.tunedName}
          .collection=${this.collection}
          .split=${split}
          .settings=${this.run?.config ?? this.settings}
          .trainSettings=${this.settings}
          .evaluations=${this.evaluations}
        ></export-screen>`;
    }
  }

  private _onNavigate(screen: ScreenName): void {
    this.screen = screen;
  }

  private _onDatasetChange(e: CustomEvent<{ dataset: Dataset; edits?: QuestionEdit[] }>): void {
    this.collection = e.detail.dataset;
    // an import or a clear may void undo steps: only those that still apply stay
    this.edits = liveHistory(e.detail.edits ?? this.edits, this.collection);
    void saveState('dataset', this.collection);
  }

  private _onSplitChange(e: CustomEvent<{ split: SplitSettings }>): void {
    this.splitSettings = e.detail.split;
    void saveState('split', this.splitSettings);
  }

  private _onBaseChange(e: CustomEvent<{ base: StoredBase }>): void {
    void this.loadBase(e.detail.base, true);
  }

  private _onSettingsChange(e: CustomEvent<{ settings: TrainConfig }>): void {
    this.settings = e.detail.settings;
    void saveState('settings', this.settings);
  }

  private _onTunedChange(e: CustomEvent<{ name: string; checkpointId: string }>): void {
    void this.setTuned(e.detail.name, e.detail.checkpointId);
  }

  private _onEvaluated(e: CustomEvent<{ result: EvaluationResult }>): void {
    this.evaluations = { ...this.evaluations, [e.detail.result.model]: e.detail.result };
  }

  // --- the training run -----------------------------------------------------

  private async _onRunStart(e: CustomEvent<{ name: string }>): Promise<void> {
    const split = this.split;
    if (!this.baseInfo) return;
    const run: RunRecord = {
      runId: `run-${Date.now().toString(36)}`,
      name: e.detail.name,
      status: 'running',
      config: { ...this.settings },
      datasetHash: await hashDataset(split.train),
      baseName: this.baseInfo.name,
      startedAt: new Date().toISOString(),
      update: 0,
      totalUpdates: 0,
      etaMs: 0,
      lastCheckpoint: null,
      series: emptySeries(),
    };
    await this.train(run, undefined);
  }

  // --- the practice stage ----------------------------------------------------

  private _onPracticeSettings(e: CustomEvent<{ settings: PracticeSettings }>): void {
    this.practiceSettings = e.detail.settings;
    void saveState('practiceSettings', this.practiceSettings);
  }

  /** The practice run's hash: the training questions it writes from and the question settings. */
  private async practiceHash(settings: { perPassage: number; seed: number; questionMatch: boolean }): Promise<string> {
    return `practice:${await hashDataset(this.split.train)}:${settings.perPassage}:${settings.seed}:${settings.questionMatch ? 'match' : 'plain'}`;
  }

  private async _onPracticeStart(e: CustomEvent<{ settings: PracticeSettings }>): Promise<void> {
    if (!this.baseInfo) return;
    const p = e.detail.settings;
    const questions = {
      perPassage: p.perPassage,
      seed: this.settings.seed,
      questionMatch: p.questionMatch || this.baseInfo.config.questionMatch !== undefined,
      domainMinutes: p.domainMinutes,
    };
    // the practice stage trains from the base: a stage run before it is dropped first
    if (this.practice) await this._onPracticeForget();
    const run: RunRecord = {
      runId: `practice-${Date.now().toString(36)}`,
      name: nextRunName(this.runs, 'practice'),
      stage: p.domainMinutes > 0 ? 'domain' : 'practice',
      practice: questions,
      status: 'running',
      config: practiceTrainSettings(this.settings, {
        epochs: p.epochs,
        maxLength: Math.min(p.maxLength, this.baseInfo.config.maxPositions),
      }),
      datasetHash: await this.practiceHash(questions),
      baseName: this.baseInfo.name,
      startedAt: new Date().toISOString(),
      update: 0,
      totalUpdates: 0,
      etaMs: 0,
      lastCheckpoint: null,
      series: emptySeries(),
    };
    await this.trainPractice(run, undefined);
  }

  private async trainPractice(run: RunRecord, resumeFrom: string | undefined): Promise<void> {
    this.run = run;
    this.haltMode = null;
    await saveState('run', run);
    await this.noteRun(run);
    const q = run.practice!;
    try {
      // 1. masked-LM on the passages, when asked and not done yet
      if (run.stage === 'domain') {
        const domain = await this.engine.call({
          kind: 'domain-pretrain',
          runId: run.runId,
          runName: run.name,
          passages: this.trainPassages(),
          config: domainTrainSettings(this.settings),
          minutes: q.domainMinutes ?? 0,
          datasetHash: `${run.datasetHash}:domain`,
          resumeFrom,
        });
        if (domain.status !== 'finished' || !domain.checkpointId) {
          const status = this.haltMode === 'stop' ? 'stopped' : 'paused';
          this.run = {
            ...this.run!,
            status,
            update: domain.update,
            etaMs: 0,
            lastCheckpoint: domain.checkpointId ? { id: domain.checkpointId, step: domain.update } : this.run!.lastCheckpoint,
          };
          await saveState('run', this.run!);
          await this.noteRun(this.run!);
          return;
        }
        this.run = {
          ...this.run!,
          stage: 'practice',
          practice: { ...q, domainDone: { checkpointId: domain.checkpointId } },
          update: 0,
          totalUpdates: 0,
          lastCheckpoint: null,
          series: emptySeries(),
        };
        await saveState('run', this.run);
        resumeFrom = undefined;
      } else if (resumeFrom === undefined && q.domainDone) {
        // a reload between the two steps lost the worker's start reader: the masked-LM stage's checkpoint has it
        await this.engine.call({ kind: 'restore-checkpoint', id: q.domainDone.checkpointId });
      }
      // 2. the practice questions
      const ended = await this.engine.call({
        kind: 'practice',
        runId: run.runId,
        runName: run.name,
        passages: this.trainPassages(),
        questions: { perPassage: q.perPassage, seed: q.seed },
        questionMatch: q.questionMatch ? (this.baseInfo?.config.questionMatch ?? 'words+sentence') : undefined,
        config: run.config,
        datasetHash: run.datasetHash,
        resumeFrom,
      });
      const status = ended.status === 'finished' ? 'finished' : this.haltMode === 'stop' ? 'stopped' : 'paused';
      this.run = {
        ...this.run!,
        status,
        update: ended.update,
        etaMs: 0,
        lastCheckpoint: ended.checkpointId ? { id: ended.checkpointId, step: ended.update } : this.run!.lastCheckpoint,
      };
      if (ended.status === 'finished' && ended.checkpointId) {
        this.practice = {
          checkpointId: ended.checkpointId,
          questions: ended.questions,
          updates: ended.update,
          finishedAt: new Date().toISOString(),
          baseName: run.baseName,
        };
        await saveState('practice', this.practice);
      }
    } catch (err) {
      this.run = { ...this.run!, status: 'failed', error: (err as Error).message };
    }
    await saveState('run', this.run!);
    await this.noteRun(this.run!);
  }

  private async _onPracticeForget(): Promise<void> {
    await this.engine.call({ kind: 'reset-start' });
    this.practice = null;
    await saveState('practice', null);
  }

  /** The training questions' passages, each once: what the practice stage writes from. */
  private trainPassages(): Array<{ id: string; text: string }> {
    const seen = new Map<string, string>();
    for (const r of this.split.train) if (!seen.has(r.passageId)) seen.set(r.passageId, r.context);
    return [...seen].map(([id, text]) => ({ id, text }));
  }

  private async _onRunContinue(): Promise<void> {
    const run = this.run;
    if (!run || !run.lastCheckpoint) return;
    if (run.stage === 'practice' || run.stage === 'domain') {
      if ((await this.practiceHash(run.practice!)) !== run.datasetHash) {
        this.run = {
          ...run,
          error: 'the training questions changed since this practice run started, so it cannot continue; start it again',
        };
        return;
      }
      await this.trainPractice(
        {
          ...run,
          status: 'running',
          update: run.lastCheckpoint.step,
          series: this.seriesUpTo(run, run.lastCheckpoint.step),
          error: undefined,
        },
        run.lastCheckpoint.id,
      );
      return;
    }
    const hash = await hashDataset(this.split.train);
    if (hash !== run.datasetHash) {
      this.run = {
        ...run,
        status: run.status,
        error: 'the training questions changed since this run started, so it cannot continue; start a new run',
      };
      return;
    }
    const step = run.lastCheckpoint.step;
    await this.train(
      { ...run, status: 'running', update: step, series: this.seriesUpTo(run, step), error: undefined },
      run.lastCheckpoint.id,
    );
  }

  /** The run's chart series up to `step`: the updates after a checkpoint will be taken again. */
  private seriesUpTo(run: RunRecord, step: number): RunRecord['series'] {
    const s = run.series;
    const keep = (xs: number[], at: number[]) => xs.filter((_, i) => at[i]! <= step);
    return {
      update: keep(s.update, s.update),
      loss: keep(s.loss, s.update),
      lr: keep(s.lr, s.update),
      tokensPerSecond: keep(s.tokensPerSecond, s.update),
      evalUpdate: keep(s.evalUpdate, s.evalUpdate),
      em: keep(s.em, s.evalUpdate),
      f1: keep(s.f1, s.evalUpdate),
    };
  }

  private async train(run: RunRecord, resumeFrom: string | undefined): Promise<void> {
    this.run = run;
    this.haltMode = null;
    await saveState('run', run);
    await this.noteRun(run);
    const split = this.split;
    try {
      const ended = await this.engine.call({
        kind: 'train',
        runId: run.runId,
        runName: run.name,
        train: split.train,
        validation: split.validation,
        config: run.config,
        datasetHash: run.datasetHash,
        resumeFrom,
      });
      const status = ended.status === 'finished' ? 'finished' : this.haltMode === 'stop' ? 'stopped' : 'paused';
      this.run = {
        ...this.run!,
        status,
        update: ended.update,
        etaMs: 0,
        lastCheckpoint: ended.checkpointId ? { id: ended.checkpointId, step: ended.update } : this.run!.lastCheckpoint,
      };
      // the session decides (src/session/runs.ts): a run with nothing saved leaves the reader in use alone
      if (ended.replacedTuned) await this.setTuned(ended.tunedReader, ended.checkpointId, ended.decoding ?? undefined);
    } catch (err) {
      this.run = { ...this.run!, status: 'failed', error: (err as Error).message };
    }
    await saveState('run', this.run!);
    await this.noteRun(this.run!);
  }

  private _onRunHalt(e: CustomEvent<{ mode: 'pause' | 'stop' }>): void {
    if (!this.run) return;
    this.haltMode = e.detail.mode;
    void this.engine.call({ kind: 'halt', runId: this.run.runId });
  }

  private _onRunEvent(runId: string, event: LoopEvent): void {
    const run = this.run;
    if (!run || run.runId !== runId) return;
    const s = run.series;
    if (event.type === 'start') {
      this.run = { ...run, totalUpdates: event.plan.totalUpdates };
    } else if (event.type === 'progress') {
      const series = {
        ...s,
        update: [...s.update, event.update],
        loss: [...s.loss, event.loss],
        lr: [...s.lr, event.lr],
        tokensPerSecond: [...s.tokensPerSecond, event.tokensPerSecond],
      };
      this.run = { ...run, update: event.update, totalUpdates: event.totalUpdates, etaMs: event.etaMs, series };
      // the chart history survives a reload; written about once a second
      if (performance.now() - this.lastRunSave > 1000) {
        this.lastRunSave = performance.now();
        void saveState('run', this.run);
      }
    } else if (event.type === 'evaluated') {
      const series = {
        ...s,
        evalUpdate: [...s.evalUpdate, event.update],
        em: [...s.em, event.metrics.validationEM ?? 0],
        f1: [...s.f1, event.metrics.validationF1 ?? 0],
      };
      this.run = { ...run, series };
    } else if (event.type === 'checkpoint') {
      if (event.id !== undefined) {
        this.run = { ...this.run!, lastCheckpoint: { id: event.id, step: event.update } };
        void saveState('run', this.run);
      }
    }
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'spanwright-app': SpanwrightApp;
  }
}
