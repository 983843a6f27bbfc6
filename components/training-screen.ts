// <training-screen> — the fine-tuning run: the settings, grouped by what a user decides
// (how long and how fast it learns open; how passages are cut into windows, how careful
// the optimiser is, scoring and repeating folded), each with its default and one line on
// what it does; the run's name, start (asking first when it would replace the fine-tuned
// reader in use) / pause / resume / stop, live charts of training loss, validation EM and
// F1, learning rate and tokens per second, progress and ETA, and the runs so far. A run
// the page lost mid-way (reload, crash) shows as interrupted with "continue from update
// N". Above the settings, the optional practice stage (<practice-panel>, folded until
// used), whose run shows in the same progress and charts. The runs themselves belong to
// the shell; this element only renders them and asks.
// Events out: settings-change {settings}, run-start {name}, run-halt {mode}, run-continue, and
// the practice panel's practice-start {settings}, practice-settings {settings}, practice-forget.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { Split } from '../src/data/split.js';
import { DEFAULT_WINDOWS, resolveWindows, type WindowSettings } from '../src/session/windows.js';
import { DEFAULT_TRAIN_CONFIG, checkTrainConfig, suggestedLearningRate, type TrainConfig } from '../src/train/config.js';
import type { BaseInfo } from '../workers/protocol.js';
import { formatDuration } from './reader-screen.js';
import { screenStyles } from './shared-styles.js';
import type { EngineClient } from './engine-client.js';
import { DEFAULT_PRACTICE, type PracticeSettings } from './practice-panel.js';
import type { PracticeState, RunRecord } from './workbench-db.js';
import { stageLabel } from '../src/session/labels.js';
import { checkRunName, nextRunName, RUN_NAME_MAX, type RunSummary } from '../src/session/runs.js';
import './metric-chart.js';
import './practice-panel.js';

type NumericField = Exclude<{ [K in keyof TrainConfig]: TrainConfig[K] extends number ? K : never }[keyof TrainConfig], undefined>;

interface Field {
  key: NumericField;
  label: string;
  step: string;
  help: string;
}

/**
 * The settings, grouped by what a user decides. The first group is always open (what
 * most runs change); the others are folded, each summed up in its heading.
 */
const GROUPS: ReadonlyArray<{ id: string; title: string; open: boolean; fields: readonly Field[] }> = [
  {
    id: 'how-long',
    title: 'How long and how fast it learns',
    open: true,
    fields: [
      { key: 'epochs', label: 'Epochs', step: '1', help: 'Passes over the training windows.' },
      {
        key: 'learningRate',
        label: 'Learning rate',
        step: 'any',
        help: 'Peak step size after warmup; smaller is steadier, larger learns faster.',
      },
      {
        key: 'batchSize',
        label: 'Windows per pass',
        step: '1',
        help: 'The batch: windows in one forward/backward pass; memory grows with it.',
      },
    ],
  },
  {
    id: 'windows',
    title: 'How passages are cut into windows',
    open: false,
    fields: [
      {
        key: 'maxLength',
        label: 'Window length',
        step: '1',
        help: 'Tokens per window, question and special tokens included; a longer passage gets several windows.',
      },
      { key: 'stride', label: 'Overlap (stride)', step: '1', help: 'Passage tokens two neighbouring windows of one passage share.' },
      { key: 'maxQueryLength', label: 'Question tokens kept', step: '1', help: 'A longer question is cut to this many tokens.' },
    ],
  },
  {
    id: 'careful',
    title: 'How careful the optimiser is',
    open: false,
    fields: [
      {
        key: 'warmupRatio',
        label: 'Warmup',
        step: 'any',
        help: 'Share of updates over which the learning rate rises from 0; then it falls linearly.',
      },
      {
        key: 'weightDecay',
        label: 'Weight decay',
        step: 'any',
        help: 'AdamW’s decoupled shrinkage of weights (none on biases and LayerNorm).',
      },
      {
        key: 'maxGradNorm',
        label: 'Gradient norm cap',
        step: 'any',
        help: 'A larger gradient is scaled down to this norm; 0 turns the cap off.',
      },
      {
        key: 'gradAccumulation',
        label: 'Passes per update',
        step: '1',
        help: 'Passes averaged into one update: an update sees windows per pass × this many.',
      },
    ],
  },
  {
    id: 'checking',
    title: 'Scoring and repeating',
    open: false,
    fields: [
      {
        key: 'evalEvery',
        label: 'Score every',
        step: '1',
        help: 'Score validation (and save a checkpoint) every this many updates; 0 = once per epoch.',
      },
      { key: 'seed', label: 'Seed', step: '1', help: 'Fixes initialisation, data order and dropout: the same seed repeats a run.' },
    ],
  },
];

const FIELDS: readonly Field[] = GROUPS.flatMap((g) => g.fields);

/** Each field's label, for other screens that name a setting (the checkpoint comparison). */
export const SETTING_LABELS: Readonly<Record<NumericField, string>> = Object.fromEntries(FIELDS.map((f) => [f.key, f.label])) as Record<
  NumericField,
  string
>;

/**
 * The workbench's defaults: BERT's settings (src/train/config.ts), the window settings of
 * src/session/windows.ts (DEFAULT_WINDOWS, which resolveWindows fills in) and one
 * evaluation per epoch. The fields start from these and the help quotes them.
 */
export const START_SETTINGS: TrainConfig = { ...DEFAULT_TRAIN_CONFIG, ...DEFAULT_WINDOWS, evalEvery: 0 };

const WINDOW_KEYS: ReadonlySet<keyof TrainConfig> = new Set<keyof WindowSettings>(['maxLength', 'stride', 'maxQueryLength']);

@customElement('training-screen')
export class TrainingScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      .fields {
        display: grid;
        grid-template-columns: repeat(auto-fill, minmax(230px, 1fr));
        gap: 0.5rem 1rem;
      }
      .fields label {
        display: flex;
        flex-direction: column;
        font-weight: 600;
      }
      .fields small {
        font-weight: 400;
        color: var(--muted, #666);
      }
      details.group {
        margin-top: 0.5rem;
      }
      details.group > summary {
        cursor: pointer;
        font-weight: 600;
      }
      details.group > summary .muted {
        font-weight: 400;
      }
      details.group[open] > summary {
        margin-bottom: 0.4rem;
      }
      details.fold > summary {
        cursor: pointer;
        font-weight: 600;
      }
      .charts {
        display: grid;
        grid-template-columns: repeat(auto-fill, minmax(250px, 1fr));
        gap: 0.6rem;
      }
      progress {
        width: 100%;
      }
      #run-name {
        width: 12rem;
        max-width: 100%;
      }
      .scroll {
        overflow-x: auto;
      }
      section.compact h3 {
        margin-top: 0;
      }
      section.compact h3.run-heading {
        margin: 0.75rem 0 0.25rem;
        padding-top: 0.5rem;
        border-top: 1px solid var(--line, #ccc);
      }
      #run-start-from {
        margin: 0.25rem 0;
      }
      details.fold {
        margin: 0 0 0.75rem;
      }
    `,
  ];

  @property({ attribute: false }) settings: TrainConfig = START_SETTINGS;
  /** the current or last run, from the shell */
  @property({ attribute: false }) run: RunRecord | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) split: Split = { train: [], validation: [] };
  @property({ attribute: false }) engine: EngineClient | null = null;
  /** the finished practice stage fine-tuning starts from, if any */
  @property({ attribute: false }) practice: PracticeState | null = null;
  @property({ attribute: false }) practiceSettings: PracticeSettings = DEFAULT_PRACTICE;
  /** the user asked the running run to pause or stop, and it has not returned yet */
  @property({ attribute: false }) halting: 'pause' | 'stop' | null = null;
  /** the fine-tuned reader in use, by name; a new run asks before it replaces it */
  @property({ attribute: false }) tunedName: string | null = null;
  /** every run started, newest first */
  @property({ attribute: false }) runs: RunSummary[] = [];
  /** saved settings were moved to the true defaults on load: said once, here */
  @property({ attribute: false }) settingsNote: string | null = null;

  @state() private formError = '';
  /** the run name typed; null: the suggested one */
  @state() private typedName: string | null = null;
  @state() private nameError = '';
  /** "Start a new run" was pressed while a fine-tuned reader is in use: the question is on screen */
  @state() private confirming = false;
  @state() private noteDismissed = false;
  /** the practice fold as the user left it (it opens by itself while practising) */
  @state() private practiceOpen = false;

  /**
   * A setting's default: the learning rate's depends on the loaded reader's width, the
   * window settings on its position table — the values resolveWindows gives when nothing
   * is asked, which is what a run of this reader uses by default.
   */
  private _defaultOf(key: keyof TrainConfig): string {
    if (key === 'learningRate' && this.baseInfo !== null)
      return `${suggestedLearningRate(this.baseInfo.config.hiddenSize)} for this reader's width`;
    if (WINDOW_KEYS.has(key)) {
      const resolved = resolveWindows({}, this.baseInfo?.config ?? { maxPositions: Infinity }).settings;
      const value = resolved[key as keyof WindowSettings];
      const cut = this.baseInfo !== null && value !== DEFAULT_WINDOWS[key as keyof WindowSettings];
      return cut ? `${value} for this reader's ${this.baseInfo!.config.maxPositions} positions` : String(value);
    }
    return String(START_SETTINGS[key]);
  }

  /** A folded group's heading line: its current values. */
  private _groupSummary(id: string): string {
    const c = this.settings;
    if (id === 'windows') return `${c.maxLength} tokens, overlap ${c.stride}, questions up to ${c.maxQueryLength} tokens`;
    if (id === 'careful')
      return `warmup ${c.warmupRatio}, weight decay ${c.weightDecay}, norm cap ${c.maxGradNorm}, ${c.gradAccumulation} pass(es) per update`;
    if (id === 'checking') return `${c.evalEvery > 0 ? `every ${c.evalEvery} updates` : 'once per epoch'}, seed ${c.seed}`;
    return '';
  }

  private get suggestedName(): string {
    return nextRunName(this.runs, 'fine-tune');
  }

  override render() {
    const run = this.run;
    const running = run?.status === 'running';
    const canStart = !running && this.baseInfo !== null && this.split.train.length > 0;
    const practising = running && (run?.stage === 'practice' || run?.stage === 'domain');
    return html`
      <h2>Training</h2>
      ${
        this.settingsNote && !this.noteDismissed
          ? html`<p class="note warn" id="settings-migrated" role="status">
              ${this.settingsNote} <button @click=${() => (this.noteDismissed = true)}>Understood</button>
            </p>`
          : ''
      }
      <details
        class="fold"
        id="practice-fold"
        ?open=${practising || this.practiceOpen}
        @toggle=${(e: Event) => (this.practiceOpen = (e.target as HTMLDetailsElement).open)}
      >
        <summary>
          Practice first (optional):
          <span class="muted"
            >${practising ? 'practising now' : this.practice ? `done, ${this.practice.questions.toLocaleString()} practice questions` : 'not run'}</span
          >
        </summary>
        <practice-panel
          .engine=${this.engine}
          .baseInfo=${this.baseInfo}
          .split=${this.split}
          .settings=${this.practiceSettings}
          .practice=${this.practice}
          ?running=${running}
        ></practice-panel>
      </details>

      <section class="compact">
        <h3>Settings</h3>
        <form @change=${this._onFormChange} @submit=${(e: Event) => e.preventDefault()}>
          ${GROUPS.map((g) =>
            g.open
              ? html`<div class="fields" id="group-${g.id}">${g.fields.map((f) => this.renderField(f, running))}</div>`
              : html`<details class="group" id="group-${g.id}">
                  <summary>${g.title} <span class="muted">— ${this._groupSummary(g.id)}</span></summary>
                  <div class="fields">${g.fields.map((f) => this.renderField(f, running))}</div>
                </details>`,
          )}
        </form>
        ${this.formError ? html`<p class="note bad" role="alert" id="settings-error">${this.formError}</p>` : ''}
        ${
          this.baseInfo && this.settings.maxLength > this.baseInfo.config.maxPositions
            ? html`<p class="note bad">
                Window length ${this.settings.maxLength} is longer than the reader's ${this.baseInfo.config.maxPositions} positions.
              </p>`
            : ''
        }
        <h3 class="run-heading">Run</h3>
        <p class="muted" id="run-start-from">
          ${run?.stage === 'practice' && running ? 'Practising now' : 'Fine-tuning starts from'}:
          ${this.practice ? `the practised reader (${this.practice.questions.toLocaleString()} practice questions)` : `the base reader${this.baseInfo ? ` ${this.baseInfo.name}` : ''}`}.
        </p>
        ${this.renderNotices()}
        <div class="row">
          <label
            >Run name
            <input
              id="run-name"
              maxlength=${RUN_NAME_MAX}
              .value=${this.typedName ?? this.suggestedName}
              ?disabled=${running}
              @input=${(e: Event) => {
                this.typedName = (e.target as HTMLInputElement).value;
                this.nameError = '';
              }}
          /></label>
          <button id="start-run" class="primary" @click=${this._onStart} ?disabled=${!canStart || this.confirming}>Start a new run</button>
          <button id="pause-run" @click=${() => this._onHalt('pause')} ?disabled=${!running}>Pause</button>
          <button id="stop-run" @click=${() => this._onHalt('stop')} ?disabled=${!running}>Stop</button>
          ${
            run && run.status === 'paused' && run.lastCheckpoint
              ? html`<button id="resume-run" class="primary" @click=${this._onContinue}>
                  Resume ${run.name ? `“${run.name}” ` : ''}from update ${run.lastCheckpoint.step}
                </button>`
              : ''
          }
        </div>
        ${this.nameError ? html`<p class="note bad" role="alert" id="run-name-error">${this.nameError}</p>` : ''}
        ${this.confirming ? this.renderConfirm() : ''} ${run ? this.renderProgress(run) : ''}
      </section>
      ${run ? this.renderCharts(run) : ''} ${this.renderHistory()}
    `;
  }

  private renderField(f: Field, running: boolean) {
    return html`<label>
      ${f.label}
      <input name=${f.key} type="number" step=${f.step} .value=${String(this.settings[f.key])} ?disabled=${running} />
      <small>${f.help} Default ${this._defaultOf(f.key)}.</small>
    </label>`;
  }

  /** The question asked before a new run replaces the fine-tuned reader in use. */
  private renderConfirm() {
    const name = this.checkedName();
    const paused = this.run?.status === 'paused' && this.run.lastCheckpoint ? this.run : null;
    return html`<div class="note warn" id="confirm-new-run" role="alertdialog" aria-labelledby="confirm-new-run-text">
      <p id="confirm-new-run-text">
        The fine-tuned reader in use is <strong>${this.tunedName}</strong>. “${'name' in name ? name.name : ''}” replaces it on every screen
        once it saves its first checkpoint or finishes; the checkpoints of earlier runs stay on the Checkpoints screen, where any of them
        can be restored. ${paused ? html`The paused run “${paused.name ?? paused.runId}” can then no longer be resumed here.` : ''}
      </p>
      <div class="row">
        <button id="confirm-start" class="primary" @click=${this._onConfirm}>
          Start “${'name' in name ? name.name : ''}” and replace it
        </button>
        <button id="cancel-start" @click=${() => (this.confirming = false)}>Keep the reader in use</button>
      </div>
    </div>`;
  }

  private renderNotices() {
    const run = this.run;
    const notes = [];
    if (!this.baseInfo) notes.push(html`<p class="note warn">Choose a base reader first (Base reader screen).</p>`);
    if (this.split.train.length === 0) notes.push(html`<p class="note warn">There are no training questions yet (Data screen).</p>`);
    if (this.split.validation.length === 0 && this.split.train.length > 0) {
      notes.push(
        html`<p class="note warn">No validation questions: the run will not be scored and checkpoints are kept by interval only.</p>`,
      );
    }
    if (run?.status === 'interrupted') {
      const name = run.name ?? run.runId;
      notes.push(
        run.lastCheckpoint
          ? html`<div class="note warn" id="interrupted" role="status">
              The run “${name}” was interrupted at update ${run.update} (the page was closed or reloaded while it trained).
              <button id="continue-run" class="primary" @click=${this._onContinue}>Continue from update ${run.lastCheckpoint.step}</button>
            </div>`
          : html`<p class="note warn" id="interrupted">The run “${name}” was interrupted before its first checkpoint; start it again.</p>`,
      );
    }
    if (run?.error) notes.push(html`<p class="note bad" role="alert" id="run-error">${run.error}</p>`);
    return notes;
  }

  private renderProgress(run: RunRecord) {
    const s = run.series;
    const lastLoss = s.loss.at(-1);
    return html`<div id="run-status" data-status=${run.status} data-update=${run.update}>
      <p>
        ${run.name ? html`<span id="run-label">“${run.name}”</span> ` : ''}
        <strong>${run.stage === 'practice' ? 'practice ' : run.stage === 'domain' ? 'masked-LM ' : ''}${run.status}</strong> — update
        <span id="run-update">${run.update}</span> of ${run.totalUpdates || '…'}
        ${lastLoss !== undefined ? html`· loss ${lastLoss.toFixed(4)}` : ''}
        ${s.f1.length ? html`· validation F1 ${s.f1.at(-1)!.toFixed(2)}` : ''}
        ${run.status === 'running' ? html`· ETA <span id="eta">${run.etaMs > 0 ? formatDuration(run.etaMs) : 'estimating…'}</span>` : ''}
        ${
          this.halting && run.status === 'running'
            ? html`·
                <span id="halting" role="status"
                  >${this.halting === 'stop' ? 'stopping' : 'pausing'} after this update and its checkpoint…</span
                >`
            : ''
        }
        ${run.lastCheckpoint ? html`· last checkpoint at update ${run.lastCheckpoint.step}` : ''}
      </p>
      <progress max=${Math.max(1, run.totalUpdates)} .value=${run.update}></progress>
    </div>`;
  }

  private renderCharts(run: RunRecord) {
    const s = run.series;
    return html`<section class="compact" id="charts">
      <h3>Charts <small class="muted">(hover a chart for its values)</small></h3>
      <div class="charts">
        <metric-chart
          id="chart-loss"
          heading="Training loss"
          yLabel="cross-entropy, nats"
          .x=${s.update}
          .series=${[{ metric: 'loss', values: s.loss }]}
        ></metric-chart>
        <metric-chart
          id="chart-eval"
          heading="Validation EM and F1"
          yLabel="percent"
          .x=${s.evalUpdate}
          .series=${[
            { metric: 'em', values: s.em },
            { metric: 'f1', values: s.f1 },
          ]}
        ></metric-chart>
        <metric-chart
          id="chart-lr"
          heading="Learning rate"
          yLabel="step size"
          scientific
          .x=${s.update}
          .series=${[{ metric: 'lr', values: s.lr }]}
        ></metric-chart>
        <metric-chart
          id="chart-speed"
          heading="Tokens per second"
          yLabel="tokens per second"
          .x=${s.update}
          .series=${[{ metric: 'tokensPerSecond', values: s.tokensPerSecond }]}
        ></metric-chart>
      </div>
    </section>`;
  }

  private renderHistory() {
    if (this.runs.length === 0) return '';
    return html`<details class="fold" id="run-history">
      <summary>Runs so far (${this.runs.length})</summary>
      <div class="scroll">
        <table>
          <thead>
            <tr>
              <th>Run</th>
              <th>Stage</th>
              <th>Status</th>
              <th class="num">Updates</th>
              <th class="num">Last validation F1</th>
              <th>Started</th>
            </tr>
          </thead>
          <tbody>
            ${this.runs.map(
              (r) =>
                html`<tr data-run=${r.runId}>
                  <td>${r.name}</td>
                  <td>${stageLabel(r.stage)}</td>
                  <td>${r.status}</td>
                  <td class="num">${r.update} of ${r.totalUpdates || '…'}</td>
                  <td class="num">${r.lastF1 === undefined ? '–' : r.lastF1.toFixed(2)}</td>
                  <td>${new Date(r.startedAt).toLocaleString()}</td>
                </tr>`,
            )}
          </tbody>
        </table>
      </div>
    </details>`;
  }

  private _onFormChange(e: Event): void {
    const form = e.currentTarget as HTMLFormElement;
    const next: TrainConfig = { ...this.settings };
    for (const f of FIELDS) {
      const input = form.elements.namedItem(f.key) as HTMLInputElement;
      (next as unknown as Record<string, number>)[f.key] = Number(input.value);
    }
    try {
      checkTrainConfig(next);
    } catch (err) {
      this.formError = (err as Error).message;
      return;
    }
    this.formError = '';
    this.dispatchEvent(new CustomEvent('settings-change', { detail: { settings: next }, bubbles: true, composed: true }));
  }

  private checkedName(): { name: string } | { error: string } {
    return checkRunName(this.typedName ?? this.suggestedName, this.runs);
  }

  private _onStart(): void {
    const name = this.checkedName();
    if ('error' in name) {
      this.nameError = name.error;
      return;
    }
    // a new run replaces the fine-tuned reader in use: ask first
    if (this.tunedName !== null) {
      this.confirming = true;
      return;
    }
    this.startRun(name.name);
  }

  private _onConfirm(): void {
    const name = this.checkedName();
    this.confirming = false;
    if ('error' in name) {
      this.nameError = name.error;
      return;
    }
    this.startRun(name.name);
  }

  private startRun(name: string): void {
    this.typedName = null;
    this.nameError = '';
    this.dispatchEvent(new CustomEvent('run-start', { detail: { name }, bubbles: true, composed: true }));
  }

  private _onHalt(mode: 'pause' | 'stop'): void {
    this.dispatchEvent(new CustomEvent('run-halt', { detail: { mode }, bubbles: true, composed: true }));
  }

  private _onContinue(): void {
    this.dispatchEvent(new CustomEvent('run-continue', { bubbles: true, composed: true }));
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'training-screen': TrainingScreen;
  }
}
