// <dataset-stats> — the dataset in numbers: questions, passages, the unanswerable
// share, the training and validation sides of the split (and which rule made it), and — once a base reader gives a tokenizer — a histogram of each question's
// token length ([CLS] question [SEP] passage [SEP]) against the max sequence length,
// with how many questions need more than one window. Token counts come from the engine
// worker (`measure`); no events out.
import { LitElement, css, html, svg } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { Split, SplitChoice } from '../src/data/split.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo, RecordLength } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import { emptyDataset, type Dataset } from './workbench-db.js';

const BINS = 24;

function passages(records: Split['train']): number {
  return new Set(records.map((r) => r.passageId)).size;
}

@customElement('dataset-stats')
export class DatasetStats extends LitElement {
  static override styles = [
    screenStyles,
    css`
      dl {
        display: grid;
        grid-template-columns: max-content auto;
        gap: 0.15rem 1rem;
        margin: 0;
      }
      dt {
        color: var(--muted, #666);
      }
      dd {
        margin: 0;
        font-variant-numeric: tabular-nums;
      }
      svg {
        width: 100%;
        max-width: 640px;
        height: auto;
      }
      .bar {
        fill: var(--accent, #1f5f8b);
      }
      .limit {
        stroke: var(--bad, #a3262a);
        stroke-width: 2;
      }
      text {
        font-size: 11px;
        fill: var(--muted, #666);
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  /** the dataset: questions and passages */
  @property({ attribute: false }) collection: Dataset = emptyDataset();
  @property({ attribute: false }) split: Split = { train: [], validation: [] };
  /** the rule that made `split`: by passage, or the imported validation file */
  @property({ attribute: false }) splitMode: SplitChoice['mode'] = 'passage';
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  /** gives the max length, stride and question length of the windows */
  @property({ attribute: false }) settings: TrainConfig | null = null;

  @state() private lengths: RecordLength[] | null = null;
  @state() private error = '';
  private measuredKey = '';

  override updated(): void {
    const s = this.settings;
    if (!this.engine || !this.baseInfo || !s || this.collection.records.length === 0) return;
    const key = `${this.baseInfo.name}|${s.maxLength}|${s.stride}|${s.maxQueryLength}|${this.collection.records.length}|${this.collection.records.at(-1)?.id}`;
    if (key === this.measuredKey) return;
    this.measuredKey = key;
    this.engine
      .call({
        kind: 'measure',
        records: this.collection.records,
        maxLength: s.maxLength,
        stride: s.stride,
        maxQueryLength: s.maxQueryLength,
      })
      .then(
        (lengths) => {
          this.lengths = lengths;
          this.error = '';
        },
        (err: Error) => (this.error = err.message),
      );
  }

  override render() {
    const records = this.collection.records;
    const unanswerable = records.filter((r) => r.unanswerable).length;
    const passagesUsed = new Set(records.map((r) => r.passageId)).size;
    const multi = this.lengths?.filter((l) => l.windows > 1).length;
    return html`
      <section>
        <h3>Statistics</h3>
        <dl id="stats">
          <dt>Questions</dt>
          <dd id="stat-questions">${records.length}</dd>
          <dt>Passages</dt>
          <dd id="stat-passages">${passagesUsed} with questions, ${this.collection.passages.length} in all</dd>
          <dt>Unanswerable</dt>
          <dd id="stat-unanswerable">${unanswerable} (${records.length ? ((100 * unanswerable) / records.length).toFixed(1) : '0.0'} %)</dd>
          <dt>Training / validation</dt>
          <dd id="stat-split" data-train=${this.split.train.length} data-validation=${this.split.validation.length}>
            ${this.split.train.length} / ${this.split.validation.length} questions, ${passages(this.split.train)} /
            ${passages(this.split.validation)} passages
            <span class="muted">(${this.splitMode === 'file' ? 'validation as imported' : 'split by passage'})</span>
          </dd>
          <dt>Need more than one window</dt>
          <dd id="stat-multi">
            ${
              multi === undefined
                ? html`<span class="muted">${this.baseInfo ? 'counting…' : 'load a base reader to count tokens'}</span>`
                : `${multi} of ${records.length} at max length ${this.settings?.maxLength}`
            }
          </dd>
        </dl>
        ${this.error ? html`<p class="error">${this.error}</p>` : ''}
        ${this.lengths && this.lengths.length > 0 && this.settings ? this.renderHistogram(this.lengths, this.settings.maxLength) : ''}
      </section>
    `;
  }

  private renderHistogram(lengths: RecordLength[], maxLength: number) {
    const longest = Math.max(maxLength, ...lengths.map((l) => l.tokens));
    const width = Math.ceil(longest / BINS);
    const counts = new Array<number>(BINS).fill(0);
    for (const l of lengths) counts[Math.min(BINS - 1, Math.floor(l.tokens / width))]! += 1;
    const top = Math.max(...counts);
    const [W, H, pad] = [600, 160, 24];
    const barW = (W - pad) / BINS;
    const x = (tokens: number) => pad + (tokens / (width * BINS)) * (W - pad);
    return html`<figure>
      <svg
        viewBox="0 0 ${W} ${H + 30}"
        role="img"
        aria-label="Histogram of question token lengths; the red line is the max length ${maxLength}"
      >
        ${counts.map((c, i) => {
          const h = top ? (c / top) * H : 0;
          return svg`<rect class="bar" x=${pad + i * barW + 1} y=${H - h} width=${barW - 2} height=${h}><title>${i * width}–${(i + 1) * width - 1} tokens: ${c}</title></rect>`;
        })}
        ${svg`<line class="limit" x1=${x(maxLength)} x2=${x(maxLength)} y1="0" y2=${H}></line>`}
        ${svg`<text x=${pad} y=${H + 16}>0</text><text x=${W - 60} y=${H + 16}>${width * BINS} tokens</text>`}
        ${svg`<text x=${Math.min(W - 110, x(maxLength) + 4)} y="12">max length ${maxLength}</text>`}
        ${svg`<text x="0" y="10">${top}</text>`}
      </svg>
      <figcaption class="muted">
        Tokens per question (question + passage + 3 special tokens). Right of the red line a question is read in several overlapping
        windows.
      </figcaption>
    </figure>`;
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'dataset-stats': DatasetStats;
  }
}
