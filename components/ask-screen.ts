// <ask-screen> — asking the reader: a question over one passage, or over every passage
// (BM25 picks the passages worth reading, the reader marks spans in them, and the two
// scores are combined), with the top answers and their scores shown in their context and
// one line saying what the scores mean; a single passage is read whole and shows the
// reader's score alone, as no retriever ran.
// The model card's caution (src/io/model-card.ts CAUTION) is always on screen.
// No events out.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import { CAUTION } from '../src/io/model-card.js';
import type { TrainConfig } from '../src/train/config.js';
import type { AskResult, BaseInfo, ModelChoice } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import type { Passage } from './workbench-db.js';
import './marked-passage.js';

/** The scores of an answer over several passages, in one line. */
const SCORE_HELP =
  'Reader: start + end logit of the span, higher is surer. Retriever: BM25 match of the passage’s words to the question. ' +
  'Combined: the two scaled to 0–1 over these answers and averaged; it ranks them.';
/** The same for one passage, where no retriever runs. */
const SCORE_HELP_SINGLE =
  'Reader: start + end logit of the span, higher is surer; with one passage read whole, it alone ranks the answers.';

@customElement('ask-screen')
export class AskScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      ol.answers li {
        margin-bottom: 0.8rem;
      }
      .answer-text {
        font-weight: 600;
      }
      .scores {
        font-size: 0.85rem;
      }
      marked-passage {
        border-left: 3px solid var(--line, #ccc);
        padding-left: 0.6rem;
        margin-top: 0.25rem;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) tunedName: string | null = null;
  /** every passage of the dataset */
  @property({ attribute: false }) passages: Passage[] = [];
  @property({ attribute: false }) settings: TrainConfig | null = null;

  @state() private question = '';
  @state() private scope: 'all' | 'one' = 'all';
  @state() private passageId = '';
  @state() private model: ModelChoice | null = null;
  @state() private result: AskResult | null = null;
  @state() private busy = false;
  @state() private error = '';

  override render() {
    const model = this.model ?? (this.tunedName ? 'tuned' : 'base');
    return html`
      <h2>Ask</h2>
      <p class="caution" id="caution" role="note"><strong>Caution.</strong> ${CAUTION}</p>
      <section>
        <label for="ask-question">Question</label>
        <textarea
          id="ask-question"
          rows="2"
          .value=${this.question}
          @input=${(e: Event) => (this.question = (e.target as HTMLTextAreaElement).value)}
          @keydown=${this._onKey}
        ></textarea>
        <div class="row spaced">
          <label
            ><input type="radio" name="scope" value="all" .checked=${this.scope === 'all'} @change=${() => (this.scope = 'all')} /> all
            ${this.passages.length} passages</label
          >
          <label
            ><input type="radio" name="scope" value="one" .checked=${this.scope === 'one'} @change=${() => (this.scope = 'one')} /> one
            passage</label
          >
          <select
            id="ask-passage"
            ?disabled=${this.scope !== 'one'}
            @change=${(e: Event) => (this.passageId = (e.target as HTMLSelectElement).value)}
          >
            ${this.passages.map((p) => html`<option value=${p.id} ?selected=${p.id === this.passageId}>${p.title ?? p.id}</option>`)}
          </select>
          <label
            >Reader
            <select id="ask-model" @change=${(e: Event) => (this.model = (e.target as HTMLSelectElement).value as ModelChoice)}>
              <option value="tuned" ?selected=${model === 'tuned'} ?disabled=${!this.tunedName}>fine-tuned</option>
              <option value="base" ?selected=${model === 'base'}>base</option>
            </select>
          </label>
          <button
            id="ask-button"
            class="primary"
            @click=${this._onAsk}
            ?disabled=${this.busy || !this.baseInfo || this.passages.length === 0}
          >
            Ask
          </button>
          ${this.busy ? html`<span class="muted">reading…</span>` : ''}
        </div>
        ${!this.baseInfo ? html`<p class="note warn">Choose a base reader first.</p>` : ''}
        ${this.error ? html`<p class="note bad" role="alert">${this.error}</p>` : ''}
      </section>
      ${this.result ? this.renderResult(this.result) : ''}
    `;
  }

  private renderResult(r: AskResult) {
    // one passage is read whole: no retriever ran, so there is no retriever score to show
    const single = r.retrieved.every((h) => h.score === null);
    return html`<section id="answers" data-mode=${single ? 'single-passage' : 'retrieval'}>
      ${r.noAnswer ? html`<p class="note warn">The reader's no-answer score beat every span: the passages read may not answer this. The best spans follow anyway.</p>` : ''}
      ${
        r.answers.length === 0
          ? html`<p class="muted">No passage shares a word with the question.</p>`
          : html`<ol class="answers">
              ${r.answers.map(
                (a) =>
                  html`<li>
                    <span class="answer-text">${a.text}</span>
                    <span class="muted scores"
                      >— passage ${a.passageId}; reader
                      ${a.readerScore.toFixed(2)}${single || a.retrieverScore === null ? '' : html`, retriever ${a.retrieverScore.toFixed(2)}, combined ${a.combinedScore.toFixed(2)}`}</span
                    >
                    <marked-passage .text=${a.context} .marks=${[{ start: a.start, end: a.end, kind: 'guess' as const }]}></marked-passage>
                  </li>`,
              )}
            </ol>`
      }
      <p class="muted" id="passages-read">
        ${
          single
            ? `Passage read whole: ${r.retrieved[0]?.passageId ?? ''}.`
            : `Passages read, with their retriever scores: ${r.retrieved.map((h) => `${h.passageId} (${(h.score ?? 0).toFixed(2)})`).join(', ')}.`
        }
      </p>
      <p class="muted score-help" id="score-help">${single ? SCORE_HELP_SINGLE : SCORE_HELP}</p>
    </section>`;
  }

  private _onKey(e: KeyboardEvent): void {
    if (e.key === 'Enter' && !e.shiftKey) {
      e.preventDefault();
      void this._onAsk();
    }
  }

  private async _onAsk(): Promise<void> {
    if (!this.engine || !this.settings) return;
    const one = this.passages.find((p) => p.id === (this.passageId || this.passages[0]?.id));
    const passages =
      this.scope === 'one' && one ? [{ id: one.id, text: one.text }] : this.passages.map((p) => ({ id: p.id, text: p.text }));
    this.busy = true;
    this.error = '';
    try {
      this.result = await this.engine.call({
        kind: 'ask',
        model: this.model ?? (this.tunedName ? 'tuned' : 'base'),
        question: this.question,
        passages,
        topPassages: 5,
        topAnswers: 5,
        maxLength: this.settings.maxLength,
        stride: this.settings.stride,
        maxQueryLength: this.settings.maxQueryLength,
      });
    } catch (err) {
      this.error = (err as Error).message;
    } finally {
      this.busy = false;
    }
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'ask-screen': AskScreen;
  }
}
