// <training-screen> — the fine-tuning run: the settings form (each with its default and
// one line on what it does), start / pause / resume / stop, live charts of training loss,
// validation EM and F1, learning rate and tokens per second, progress and ETA. A run the
// page lost mid-way (reload, crash) shows as interrupted with "continue from update N".
// Above the run, the optional practice stage (<practice-panel>), whose run shows in the
// same progress and charts. The runs themselves belong to the shell; this element only
// renders them and asks.
// Events out: settings-change {settings}, run-start, run-halt {mode}, run-continue, and
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
import './metric-chart.js';
import './practice-panel.js';

type NumericField = Exclude<{ [K in keyof TrainConfig]: TrainConfig[K] extends number ? K : never }[keyof TrainConfig], undefined>;

/** The form's fields, in order, each with a one-line explanation. */
const FIELDS: ReadonlyArray<{ key: NumericField; label: string; step: string; help: string }> = [
  {
    key: 'learningRate',
    label: 'Learning rate',
    step: 'any',
    help: 'Peak step size of AdamW after warmup; smaller is steadier, larger learns faster.',
  },
  { key: 'batchSize', label: 'Batch', step: '1', help: 'Windows per forward/backward pass; memory grows with it.' },
  {
    key: 'gradAccumulation',
    label: 'Accumulation',
    step: '1',
    help: 'Passes averaged into one update: the update sees batch × this many windows.',
  },
  { key: 'epochs', label: 'Epochs', step: '1', help: 'Passes over the training windows.' },
  {
    key: 'maxLength',
    label: 'Max length',
    step: '1',
    help: 'Tokens per window, question and special tokens included; longer passages get several windows.',
  },
  { key: 'stride', label: 'Stride', step: '1', help: 'Passage tokens shared by two neighbouring windows of one long passage.' },
  { key: 'maxQueryLength', label: 'Max question length', step: '1', help: 'Question tokens kept; longer questions are cut.' },
  {
    key: 'warmupRatio',
    label: 'Warmup',
    step: 'any',
    help: 'Share of updates over which the learning rate rises from 0 before it decays linearly.',
  },
  {
    key: 'weightDecay',
    label: 'Weight decay',
    step: 'any',
    help: 'AdamW’s decoupled shrinkage of weights (none on biases and LayerNorm).',
  },
  {
    key: 'maxGradNorm',
    label: 'Clipping',
    step: 'any',
    help: 'Largest global gradient norm before it is scaled down; 0 turns clipping off.',
  },
  { key: 'seed', label: 'Seed', step: '1', help: 'Fixes initialisation, data order and dropout: the same seed repeats a run.' },
  {
    key: 'evalEvery',
    label: 'Evaluation interval',
    step: '1',
    help: 'Score validation (and save a checkpoint) every this many updates; 0 = once per epoch.',
  },
];

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
      form {
        display: grid;
        grid-template-columns: repeat(auto-fill, minmax(270px, 1fr));
        gap: 0.6rem 1rem;
      }
      form label {
        display: flex;
        flex-direction: column;
        font-weight: 600;
      }
      form small {
        font-weight: 400;
        color: var(--muted, #666);
      }
      .charts {
        display: grid;
        grid-template-columns: repeat(auto-fill, minmax(360px, 1fr));
        gap: 0.75rem;
      }
      progress {
        width: 100%;
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

  @state() private formError = '';

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

  override render() {
    const run = this.run;
    const running = run?.status === 'running';
    const canStart = !running && this.baseInfo !== null && this.split.train.length > 0;
    return html`
      <h2>Training</h2>
      <section>
        <h3>Settings</h3>
        <form @change=${this._onFormChange} @submit=${(e: Event) => e.preventDefault()}>
          ${FIELDS.map(
            (f) =>
              html`<label>
                ${f.label}
                <input name=${f.key} type="number" step=${f.step} .value=${String(this.settings[f.key])} ?disabled=${running} />
                <small>${f.help} Default ${this._defaultOf(f.key)}.</small>
              </label>`,
          )}
        </form>
        ${this.formError ? html`<p class="note bad" role="alert" id="settings-error">${this.formError}</p>` : ''}
        ${
          this.baseInfo && this.settings.maxLength > this.baseInfo.config.maxPositions
            ? html`<p class="note bad">
                Max length ${this.settings.maxLength} is longer than the reader's ${this.baseInfo.config.maxPositions} positions.
              </p>`
            : ''
        }
      </section>

      <practice-panel
        .engine=${this.engine}
        .baseInfo=${this.baseInfo}
        .split=${this.split}
        .settings=${this.practiceSettings}
        .practice=${this.practice}
        ?running=${running}
      ></practice-panel>

      <section>
        <h3>Run</h3>
        <p class="muted" id="run-start-from">
          ${run?.stage === 'practice' && running ? 'Practising now' : 'Fine-tuning starts from'}:
          ${this.practice ? `the practised reader (${this.practice.questions.toLocaleString()} practice questions)` : `the base reader${this.baseInfo ? ` ${this.baseInfo.name}` : ''}`}.
        </p>
        ${this.renderNotices()}
        <div class="row">
          <button id="start-run" class="primary" @click=${this._onStart} ?disabled=${!canStart}>Start a new run</button>
          <button id="pause-run" @click=${() => this._onHalt('pause')} ?disabled=${!running}>Pause</button>
          <button id="stop-run" @click=${() => this._onHalt('stop')} ?disabled=${!running}>Stop</button>
          ${
            run && run.status === 'paused' && run.lastCheckpoint
              ? html`<button id="resume-run" class="primary" @click=${this._onContinue}>
                  Resume from update ${run.lastCheckpoint.step}
                </button>`
              : ''
          }
        </div>
        ${run ? this.renderProgress(run) : ''}
      </section>
      ${run ? this.renderCharts(run) : ''}
    `;
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
      notes.push(
        run.lastCheckpoint
          ? html`<div class="note warn" id="interrupted" role="status">
              The run ${run.runId} was interrupted at update ${run.update} (the page was closed or reloaded while it trained).
              <button id="continue-run" class="primary" @click=${this._onContinue}>Continue from update ${run.lastCheckpoint.step}</button>
            </div>`
          : html`<p class="note warn" id="interrupted">
              The run ${run.runId} was interrupted before its first checkpoint; start it again.
            </p>`,
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
    return html`<section>
      <h3>Charts</h3>
      <div class="charts">
        <metric-chart
          id="chart-loss"
          heading="Training loss"
          .x=${s.update}
          .series=${[{ label: 'loss', values: s.loss, stroke: '#1f5f8b' }]}
        ></metric-chart>
        <metric-chart
          id="chart-eval"
          heading="Validation EM and F1"
          .x=${s.evalUpdate}
          .series=${[
            { label: 'EM', values: s.em, stroke: '#8a5a00' },
            { label: 'F1', values: s.f1, stroke: '#2d6a3e' },
          ]}
        ></metric-chart>
        <metric-chart
          id="chart-lr"
          heading="Learning rate"
          scientific
          .x=${s.update}
          .series=${[{ label: 'lr', values: s.lr, stroke: '#6b3fa0' }]}
        ></metric-chart>
        <metric-chart
          id="chart-speed"
          heading="Tokens per second"
          .x=${s.update}
          .series=${[{ label: 'tokens/s', values: s.tokensPerSecond, stroke: '#a3262a' }]}
        ></metric-chart>
      </div>
    </section>`;
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

  private _onStart(): void {
    this.dispatchEvent(new CustomEvent('run-start', { bubbles: true, composed: true }));
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
