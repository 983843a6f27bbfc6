// <practice-panel> — the optional practice stage before fine-tuning, on the Training
// screen: questions the engine writes itself from the training passages (never the
// validation ones), a sample of them to read before training, their settings, and the
// state of the stage (not run, running, done: fine-tuning then starts from it). The run's
// progress shows in the training screen's progress and charts, like a fine-tuning run.
// It asks the engine for the sample itself (a quick, read-only request); the stage run
// belongs to the shell.
// Events out: practice-start {options}, practice-forget.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { Split } from '../src/data/split.js';
import type { BaseInfo, PracticePreview } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import './marked-passage.js';
import { screenStyles } from './shared-styles.js';
import type { PracticeState } from './workbench-db.js';

/** The stage's settings as the page keeps them. */
export interface PracticeSettings {
  /** practice questions written per passage */
  perPassage: number;
  /** passes over them */
  epochs: number;
  /** tokens per practice window */
  maxLength: number;
  /** mark passage words found in the question and the best-matching sentence (turned on for a base that lacks them) */
  questionMatch: boolean;
  /** minutes of masked-LM on the same passages before the questions; 0: none */
  domainMinutes: number;
}

/** The same defaults as the command line's (src/cli/commands/train.ts, PRACTICE_DEFAULTS). */
export const DEFAULT_PRACTICE: PracticeSettings = { perPassage: 40, epochs: 1, maxLength: 256, questionMatch: true, domainMinutes: 0 };

const KIND_LABEL: Record<string, string> = {
  cloze: 'from a sentence',
  recurring: 'a repeated name or phrase',
  'no-answer-removed': 'no answer: its sentence taken out',
  'no-answer-other': 'no answer: asked of another passage',
};

@customElement('practice-panel')
export class PracticePanel extends LitElement {
  static override styles = [
    screenStyles,
    css`
      .fields {
        display: flex;
        flex-wrap: wrap;
        gap: 0.6rem 1.2rem;
        align-items: end;
      }
      .fields label {
        display: flex;
        flex-direction: column;
        font-weight: 600;
      }
      .fields input[type='number'] {
        width: 7rem;
      }
      .sample {
        max-height: 26rem;
        overflow: auto;
      }
      .sample td {
        vertical-align: top;
      }
      .sample marked-passage {
        font-size: 0.85rem;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) split: Split = { train: [], validation: [] };
  @property({ attribute: false }) settings: PracticeSettings = DEFAULT_PRACTICE;
  /** the finished stage the start reader comes from, if any */
  @property({ attribute: false }) practice: PracticeState | null = null;
  /** a run (practice or fine-tuning) is training now */
  @property({ type: Boolean }) running = false;

  @state() private preview: PracticePreview | null = null;
  @state() private busy = false;
  @state() private error = '';

  private get passages() {
    const seen = new Map<string, string>();
    for (const r of this.split.train) if (!seen.has(r.passageId)) seen.set(r.passageId, r.context);
    return [...seen].map(([id, text]) => ({ id, text }));
  }

  override render() {
    const baseHasMatch = this.baseInfo?.config.questionMatch !== undefined;
    const passages = this.passages.length;
    return html`<section id="practice">
      <h3>Practice first (optional)</h3>
      <p class="muted">
        Before your own questions, the reader can practise on questions Spanwright writes from your training passages: a sentence turned
        into a question about one of its names, numbers, dates or phrases, and the same question asked where its answer is missing. A small
        reader gets far more to learn from. Optionally the reader first reads the same passages with masked-LM training (words hidden and
        guessed back) for a few minutes. The validation passages are never used.
      </p>
      <div class="fields">
        <label
          >Questions per passage
          <input
            id="practice-per-passage"
            type="number"
            min="1"
            step="1"
            .value=${String(this.settings.perPassage)}
            @change=${this._onChange}
            ?disabled=${this.running}
        /></label>
        <label
          >Passes
          <input
            id="practice-epochs"
            type="number"
            min="1"
            step="1"
            .value=${String(this.settings.epochs)}
            @change=${this._onChange}
            ?disabled=${this.running}
        /></label>
        <label
          >Window tokens
          <input
            id="practice-max-len"
            type="number"
            min="32"
            step="1"
            .value=${String(this.settings.maxLength)}
            @change=${this._onChange}
            ?disabled=${this.running}
        /></label>
        <label title="Masked-language-model training on the same passages before the questions: the reader reads your domain's words first">
          Masked-LM minutes first
          <input
            id="practice-domain-minutes"
            type="number"
            min="0"
            step="any"
            .value=${String(this.settings.domainMinutes)}
            @change=${this._onChange}
            ?disabled=${this.running}
          />
        </label>
        <label title="Passage words that also occur in the question, and the sentence that shares most of them, get their own token types">
          <span
            ><input
              id="practice-match"
              type="checkbox"
              .checked=${baseHasMatch || this.settings.questionMatch}
              ?disabled=${baseHasMatch || this.running}
              @change=${this._onChange}
            />
            mark question words and the best-matching sentence</span
          >
        </label>
      </div>
      <div class="row">
        <button id="practice-preview" @click=${this._onPreview} ?disabled=${this.busy || passages === 0 || !this.baseInfo}>
          Show sample questions
        </button>
        <button id="practice-start" class="primary" @click=${this._onStart} ?disabled=${this.running || passages === 0 || !this.baseInfo}>
          Start practice on ${passages} passages
        </button>
        ${this.practice ? html`<button id="practice-forget" @click=${this._onForget} ?disabled=${this.running}>Start from the base reader again</button>` : ''}
      </div>
      ${
        this.practice
          ? html`<p class="note good" id="practice-done">
              Fine-tuning now starts from the practised reader: ${this.practice.questions.toLocaleString()} practice questions,
              ${this.practice.updates} updates (${this.practice.finishedAt.slice(0, 16).replace('T', ' ')}).
            </p>`
          : html`<p class="muted" id="practice-none">Fine-tuning starts from the base reader.</p>`
      }
      ${this.error ? html`<p class="note bad" role="alert">${this.error}</p>` : ''} ${this.preview ? this.renderPreview(this.preview) : ''}
    </section>`;
  }

  private renderPreview(p: PracticePreview) {
    return html`<div id="practice-sample">
      <p>
        <strong>${p.questions.toLocaleString()}</strong> questions from ${p.passages} passages (${p.unanswerable.toLocaleString()} without
        an answer${p.emptyPassages > 0 ? `; ${p.emptyPassages} passages gave none` : ''}). They are written by rules, not by a person:
        terse, sometimes ungrammatical, and now and then about an odd span. A sample:
      </p>
      <div class="sample">
        <table>
          <thead>
            <tr>
              <th>Question</th>
              <th>Answer</th>
              <th>Kind</th>
              <th>Where</th>
            </tr>
          </thead>
          <tbody>
            ${p.sample.map((q) => {
              const from = q.span ? Math.max(0, q.span.start - 90) : 0;
              const to = q.span ? Math.min(q.context.length, q.span.end + 90) : Math.min(q.context.length, 180);
              return html`<tr>
                <td>${q.question}</td>
                <td>${q.answer === '' ? html`<em>no answer</em>` : q.answer}</td>
                <td class="muted">${KIND_LABEL[q.kind] ?? q.kind}</td>
                <td>
                  <marked-passage
                    .text=${`${from > 0 ? '…' : ''}${q.context.slice(from, to)}${to < q.context.length ? '…' : ''}`}
                    .marks=${q.span ? [{ start: q.span.start - from + (from > 0 ? 1 : 0), end: q.span.end - from + (from > 0 ? 1 : 0), kind: 'gold' as const }] : []}
                  ></marked-passage>
                </td>
              </tr>`;
            })}
          </tbody>
        </table>
      </div>
    </div>`;
  }

  private _read(): PracticeSettings {
    const value = (id: string) => Number((this.renderRoot.querySelector(`#${id}`) as HTMLInputElement).value);
    return {
      perPassage: value('practice-per-passage'),
      epochs: value('practice-epochs'),
      maxLength: value('practice-max-len'),
      questionMatch: (this.renderRoot.querySelector('#practice-match') as HTMLInputElement).checked,
      domainMinutes: value('practice-domain-minutes'),
    };
  }

  private _onChange(): void {
    const next = this._read();
    const bad = (['perPassage', 'epochs', 'maxLength'] as const).find((k) => !Number.isInteger(next[k]) || next[k] < 1);
    if (!(next.domainMinutes >= 0)) {
      this.error = 'Masked-LM minutes must be 0 or more.';
      return;
    }
    if (bad) {
      this.error = `${bad === 'perPassage' ? 'Questions per passage' : bad === 'epochs' ? 'Passes' : 'Window tokens'} must be a whole number above 0.`;
      return;
    }
    if (this.baseInfo && next.maxLength > this.baseInfo.config.maxPositions) {
      this.error = `Window tokens ${next.maxLength} is longer than the reader's ${this.baseInfo.config.maxPositions} positions.`;
      return;
    }
    this.error = '';
    this.settings = next;
    this.preview = null;
    this.dispatchEvent(new CustomEvent('practice-settings', { detail: { settings: next }, bubbles: true, composed: true }));
  }

  private async _onPreview(): Promise<void> {
    if (!this.engine) return;
    this.busy = true;
    this.error = '';
    try {
      this.preview = await this.engine.call({
        kind: 'preview-practice',
        passages: this.passages,
        questions: { perPassage: this.settings.perPassage },
        sample: 16,
      });
    } catch (err) {
      this.error = (err as Error).message;
    } finally {
      this.busy = false;
    }
  }

  private _onStart(): void {
    if (this.error) return;
    this.dispatchEvent(new CustomEvent('practice-start', { detail: { settings: this.settings }, bubbles: true, composed: true }));
  }

  private _onForget(): void {
    this.dispatchEvent(new CustomEvent('practice-forget', { bubbles: true, composed: true }));
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'practice-panel': PracticePanel;
  }
}
