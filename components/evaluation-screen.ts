// <evaluation-screen> — how well the readers do on the validation questions, by the
// SQuAD 2.0 rules: EM and F1 over all, answerable and unanswerable questions, the
// no-answer threshold that maximises F1, the base reader beside the fine-tuned one, and
// a per-question table (filterable to the misses) whose rows open onto the passage with
// the gold answer and the prediction marked; below them, a learning curve on request
// (<learning-curve>: F1 and EM against the number of training questions). Scoring shows
// its progress ("question 40 of 82") and can be cancelled; the warnings under the table
// say which of its rows they compare.
// Events out: evaluated {result} for each reader scored.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { QARecord } from '../src/data/record.js';
import { readerWarnings } from '../src/eval/reader-warnings.js';
import type { SquadScores } from '../src/eval/squad-metric.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo, EvaluationResult, ModelChoice } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import type { Mark } from './marked-passage.js';
import { screenStyles } from './shared-styles.js';
import './learning-curve.js';
import './marked-passage.js';

const pct = (v: number | null | undefined) => (v === null || v === undefined ? '–' : v.toFixed(2));

@customElement('evaluation-screen')
export class EvaluationScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      .outcome-correct {
        color: var(--good, #2d6a3e);
      }
      .outcome-partial {
        color: var(--warn, #8a5a00);
      }
      .outcome-wrong-span,
      .outcome-false-no-answer,
      .outcome-false-answer {
        color: var(--bad, #a3262a);
      }
      details summary {
        cursor: pointer;
      }
      .legend mark {
        padding: 0 0.3rem;
      }
      .legend .gold {
        background: var(--gold, #f3df8f);
      }
      .legend .guess {
        box-shadow: inset 0 -0.45em 0 var(--guess, #b9d7ef);
        background: none;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) tunedName: string | null = null;
  /** the training questions of the current split (for the learning curve) */
  @property({ attribute: false }) train: QARecord[] = [];
  /** the validation questions of the current split */
  @property({ attribute: false }) validation: QARecord[] = [];
  @property({ attribute: false }) settings: TrainConfig | null = null;
  /** the last results, kept by the shell across screen changes */
  @property({ attribute: false }) results: { base?: EvaluationResult; tuned?: EvaluationResult } = {};

  @state() private busy = '';
  /** the evaluation in progress: which reader, how far, whether a cancel was asked */
  @state() private progress: { evaluationId: string; reader: string; done: number; total: number; cancelling: boolean } | null = null;
  @state() private cancelled = '';
  private stopListening: (() => void) | null = null;
  @state() private error = '';
  @state() private shown: 'base' | 'tuned' = 'tuned';
  @state() private missesOnly = false;

  override render() {
    const { base, tuned } = this.results;
    const can = this.baseInfo !== null && this.validation.length > 0 && this.busy === '';
    return html`
      <h2>Evaluation</h2>
      <section>
        <p class="muted">
          ${this.validation.length} validation questions; scores by the SQuAD 2.0 rules (exact match and token F1, in percent).
        </p>
        <div class="row">
          <button id="evaluate" class="primary" @click=${this._onEvaluate} ?disabled=${!can}>
            Evaluate the base${this.tunedName ? ' and the fine-tuned reader' : ' reader'}
          </button>
          ${
            this.progress
              ? html`<button id="evaluate-cancel" @click=${this._onCancel} ?disabled=${this.progress.cancelling}>Cancel</button>`
              : ''
          }
          ${!this.tunedName ? html`<span class="muted">No fine-tuned reader yet: train one, or restore a checkpoint.</span>` : ''}
        </div>
        ${
          this.progress
            ? html`<p id="evaluate-progress" role="status" data-done=${this.progress.done} data-total=${this.progress.total}>
                ${this.progress.cancelling ? 'cancelling after the questions in hand… ' : ''}Scoring ${this.progress.reader}: question
                ${this.progress.done} of ${this.progress.total}
                <progress max=${Math.max(1, this.progress.total)} .value=${this.progress.done}></progress>
              </p>`
            : this.busy
              ? html`<p class="muted">${this.busy}</p>`
              : ''
        }
        ${this.cancelled ? html`<p class="note" role="status" id="evaluate-cancelled">${this.cancelled}</p>` : ''}
        ${this.error ? html`<p class="note bad" role="alert">${this.error}</p>` : ''}
      </section>
      ${base || tuned ? this.renderSummary(base, tuned) : ''}
      <learning-curve
        .engine=${this.engine}
        .baseInfo=${this.baseInfo}
        .train=${this.train}
        .validation=${this.validation}
        .settings=${this.settings}
      ></learning-curve>
      ${this.renderQuestions()}
    `;
  }

  private renderSummary(base: EvaluationResult | undefined, tuned: EvaluationResult | undefined) {
    const cols = [base, tuned];
    const row = (label: string, pick: (s: SquadScores) => number | null) =>
      html`<tr>
        <th>${label}</th>
        ${cols.map((r) => html`<td class="num">${r ? pct(pick(r.summary)) : '–'}</td>`)}
      </tr>`;
    return html`<section>
      <h3>Base beside fine-tuned</h3>
      <table id="eval-summary">
        <thead>
          <tr>
            <th></th>
            <th class="num">base${base ? html`<br /><small class="muted reader-name">${base.reader}</small>` : ''}</th>
            <th class="num">fine-tuned${tuned ? html`<br /><small class="muted reader-name">${tuned.reader}</small>` : ''}</th>
          </tr>
        </thead>
        <tbody>
          ${row('EM, all', (s) => s.em)} ${row('F1, all', (s) => s.f1)} ${row('EM, answerable', (s) => s.answerable.em)}
          ${row('F1, answerable', (s) => s.answerable.f1)} ${row('EM, unanswerable', (s) => s.unanswerable.em)}
          ${row('F1, unanswerable', (s) => s.unanswerable.f1)}
          <tr>
            <th>Decoded with: no-answer threshold, kind bonus</th>
            ${cols.map(
              (r) =>
                html`<td class="num decoding-used">
                  ${r ? `${r.decoding.nullThreshold.toFixed(3)}, ${r.decoding.kindBonus}` : '–'}${
                    r?.decoding.saved ? html`<br /><small class="muted">chosen on its training questions</small>` : ''
                  }
                </td>`,
            )}
          </tr>
          <tr>
            <th>No-answer threshold (F1-best)</th>
            ${cols.map((r) => html`<td class="num">${r?.bestCut ? r.bestCut.threshold.toFixed(3) : '–'}</td>`)}
          </tr>
          <tr>
            <th>F1 at that threshold</th>
            ${cols.map((r) => html`<td class="num">${r?.bestCut ? pct(r.bestCut.summary.f1) : '–'}</td>`)}
          </tr>
          <tr>
            <th>EM at that threshold</th>
            ${cols.map((r) => html`<td class="num">${r?.bestCut ? pct(r.bestCut.summary.em) : '–'}</td>`)}
          </tr>
        </tbody>
      </table>
      ${
        tuned
          ? // the same numbers as the table's "F1, all" row (its decoding as shown), and the warning says so
            readerWarnings(tuned.summary, base ? base.summary : null, null, 'the “F1, all” row').map(
              (w) => html`<p class="note warn reader-warning">${w.replace(/^warning: (.)/, (_, c: string) => c.toUpperCase())}</p>`,
            )
          : ''
      }
    </section>`;
  }

  private renderQuestions() {
    const result = this.results[this.shown] ?? this.results.base;
    if (!result) return '';
    const rows = result.questions.filter((q) => !this.missesOnly || q.outcome !== 'correct');
    return html`<section>
      <h3>Question by question</h3>
      <div class="row">
        <label
          >Reader
          <select @change=${(e: Event) => (this.shown = (e.target as HTMLSelectElement).value as 'base' | 'tuned')}>
            <option value="tuned" ?selected=${result.model === 'tuned'} ?disabled=${!this.results.tuned}>fine-tuned</option>
            <option value="base" ?selected=${result.model === 'base'}>base</option>
          </select>
        </label>
        <label
          ><input
            id="misses-only"
            type="checkbox"
            .checked=${this.missesOnly}
            @change=${(e: Event) => (this.missesOnly = (e.target as HTMLInputElement).checked)}
          />
          misses only</label
        >
        <span class="muted">${rows.length} of ${result.questions.length} shown</span>
        <span class="legend"><mark class="gold">gold</mark> <mark class="guess">prediction</mark></span>
      </div>
      <table id="question-table">
        <thead>
          <tr>
            <th>Question</th>
            <th>Gold</th>
            <th>Predicted</th>
            <th class="num">F1</th>
            <th>Outcome</th>
          </tr>
        </thead>
        <tbody>
          ${rows.slice(0, 300).map((q) => {
            const marks: Mark[] = [
              ...q.gold.map((g) => ({ start: g.start, end: g.end, kind: 'gold' as const })),
              ...(q.predictedSpan ? [{ ...q.predictedSpan, kind: 'guess' as const }] : []),
            ];
            return html`<tr data-id=${q.id} data-outcome=${q.outcome}>
              <td>
                <details>
                  <summary>${q.question}</summary>
                  <marked-passage .text=${q.context} .marks=${marks}></marked-passage>
                </details>
              </td>
              <td>${q.unanswerable ? html`<em>no answer</em>` : q.gold.map((g) => g.text).join(' | ')}</td>
              <td>${q.prediction === '' ? html`<em>no answer</em>` : q.prediction}</td>
              <td class="num">${(100 * q.f1).toFixed(0)}</td>
              <td class="outcome-${q.outcome}">${q.outcome}</td>
            </tr>`;
          })}
        </tbody>
      </table>
      ${rows.length > 300 ? html`<p class="muted">The first 300 are shown.</p>` : ''}
    </section>`;
  }

  private async _onEvaluate(): Promise<void> {
    const engine = this.engine;
    if (!engine || !this.settings) return;
    const { maxLength, stride, maxQueryLength } = this.settings;
    this.error = '';
    this.cancelled = '';
    const models: ModelChoice[] = this.tunedName ? ['base', 'tuned'] : ['base'];
    this.busy = 'starting…';
    try {
      for (const model of models) {
        const evaluationId = `evaluation-${Date.now().toString(36)}-${model}`;
        const reader =
          model === 'base' ? `the base reader${this.baseInfo ? ` ${this.baseInfo.name}` : ''}` : `the fine-tuned reader ${this.tunedName}`;
        this.progress = { evaluationId, reader, done: 0, total: this.validation.length, cancelling: false };
        this.stopListening?.();
        this.stopListening = engine.onEvaluationProgress((id, done, total) => {
          if (this.progress?.evaluationId === id) this.progress = { ...this.progress, done, total };
        });
        const ended = await engine.call({
          kind: 'evaluate-in-steps',
          evaluationId,
          model,
          records: this.validation,
          maxLength,
          stride,
          maxQueryLength,
        });
        if (ended.status === 'cancelled') {
          this.cancelled = `Cancelled after ${ended.done} of ${ended.total} questions of ${reader}; the scores shown are those of the last evaluation that finished.`;
          return;
        }
        this.dispatchEvent(new CustomEvent('evaluated', { detail: { result: ended.result }, bubbles: true, composed: true }));
      }
      this.shown = this.tunedName ? 'tuned' : 'base';
    } catch (err) {
      this.error = (err as Error).message;
    } finally {
      this.stopListening?.();
      this.stopListening = null;
      this.progress = null;
      this.busy = '';
    }
  }

  private _onCancel(): void {
    const p = this.progress;
    if (!p || !this.engine) return;
    this.progress = { ...p, cancelling: true };
    void this.engine.call({ kind: 'cancel-evaluation', evaluationId: p.evaluationId });
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    // scores nobody is waiting for any more
    if (this.progress && this.engine) void this.engine.call({ kind: 'cancel-evaluation', evaluationId: this.progress.evaluationId });
    this.stopListening?.();
    this.stopListening = null;
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'evaluation-screen': EvaluationScreen;
  }
}
