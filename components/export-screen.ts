// <export-screen> — taking results out: the model directory (config, safetensors,
// vocabulary, model card) in float32 or float16, with int8 weights and ONNX graphs on
// request, built in the worker (src/io/export.ts); and the cleaned dataset in each
// import format (src/data/load.ts writeDataset). Files are offered as downloads made
// from in-memory blobs; nothing is uploaded anywhere. No events out.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import { hashDataset } from '../src/data/hash.js';
import { writeDataset } from '../src/data/load.js';
import type { Split } from '../src/data/split.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo, EvaluationResult, ModelChoice } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import { emptyDataset, type Dataset } from './workbench-db.js';

interface Offered {
  name: string;
  bytes: number;
  url: string;
}

type Variant = 'fp32' | 'fp16' | 'int8' | 'onnx';

const VARIANTS: ReadonlyArray<{ variant: Variant; label: string; help: string }> = [
  { variant: 'fp32', label: 'Model files (float32)', help: 'config.json, model.safetensors, the vocabulary and MODEL_CARD.md' },
  { variant: 'fp16', label: 'Model files (float16)', help: 'the same with half-size weights, rounded to binary16' },
  {
    variant: 'int8',
    label: 'Model files + int8 weights',
    help: 'adds model.int8.safetensors (per-row symmetric) and its measured logit drift in the card',
  },
  { variant: 'onnx', label: 'Model files + ONNX', help: 'adds model.onnx (opset 17) and model.int8.onnx' },
];

const TYPES: Record<string, string> = {
  json: 'application/json',
  jsonl: 'application/x-ndjson',
  csv: 'text/csv',
  md: 'text/markdown',
  txt: 'text/plain',
};

@customElement('export-screen')
export class ExportScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      ul.files li {
        margin: 0.2rem 0;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) tunedName: string | null = null;
  /** the dataset: questions and passages */
  @property({ attribute: false }) collection: Dataset = emptyDataset();
  @property({ attribute: false }) split: Split = { train: [], validation: [] };
  /** the settings of the run that made the fine-tuned reader, for the card */
  @property({ attribute: false }) settings: TrainConfig | null = null;
  @property({ attribute: false }) evaluations: { base?: EvaluationResult; tuned?: EvaluationResult } = {};

  @state() private model: ModelChoice | null = null;
  @state() private offered: Offered[] = [];
  @state() private busy = '';
  @state() private error = '';
  @state() private notes: string[] = [];

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    for (const f of this.offered) URL.revokeObjectURL(f.url);
  }

  override render() {
    const model = this.model ?? (this.tunedName ? 'tuned' : 'base');
    const records = this.collection.records.length;
    return html`
      <h2>Export</h2>
      <section>
        <h3>Reader</h3>
        <div class="row">
          <label
            >Export
            <select id="export-model" @change=${(e: Event) => (this.model = (e.target as HTMLSelectElement).value as ModelChoice)}>
              <option value="tuned" ?selected=${model === 'tuned'} ?disabled=${!this.tunedName}>
                the fine-tuned reader${this.tunedName ? ` (${this.tunedName})` : ''}
              </option>
              <option value="base" ?selected=${model === 'base'}>the base reader</option>
            </select>
          </label>
        </div>
        <ul>
          ${VARIANTS.map(
            (v) =>
              html`<li>
                <button id="export-${v.variant}" @click=${() => this._onExport(v.variant)} ?disabled=${!this.baseInfo || this.busy !== ''}>
                  ${v.label}
                </button>
                <span class="muted">${v.help}</span>
              </li>`,
          )}
        </ul>
        ${!this.baseInfo ? html`<p class="note warn">Choose a base reader first.</p>` : ''}
      </section>
      <section>
        <h3>Dataset (${records} checked questions)</h3>
        <div class="row">
          <button id="data-jsonl" @click=${() => this._onData('jsonl')} ?disabled=${records === 0}>JSONL</button>
          <button id="data-squad" @click=${() => this._onData('squad')} ?disabled=${records === 0}>SQuAD 2.0 JSON</button>
          <button id="data-csv" @click=${() => this._onData('csv')} ?disabled=${records === 0}>CSV</button>
        </div>
      </section>
      ${this.busy ? html`<p class="muted">${this.busy}</p>` : ''}
      ${this.error ? html`<p class="note bad" role="alert">${this.error}</p>` : ''}
      ${
        this.offered.length > 0
          ? html`<section id="downloads">
              <h3>Ready to download</h3>
              <ul class="files">
                ${this.offered.map((f) => html`<li><a href=${f.url} download=${f.name} data-file=${f.name}>${f.name}</a> <span class="muted">${f.bytes.toLocaleString('en-US')} bytes</span></li>`)}
              </ul>
              ${
                this.notes.length
                  ? html`<ul>
                      ${this.notes.map((n) => html`<li class="muted">${n}</li>`)}
                    </ul>`
                  : ''
              }
            </section>`
          : ''
      }
    `;
  }

  private offer(files: Array<{ name: string; bytes: Uint8Array }>): void {
    for (const f of this.offered) URL.revokeObjectURL(f.url);
    this.offered = files.map((f) => {
      const ext = f.name.split('.').pop() ?? '';
      const blob = new Blob([f.bytes as Uint8Array<ArrayBuffer>], { type: TYPES[ext] ?? 'application/octet-stream' });
      return { name: f.name, bytes: f.bytes.length, url: URL.createObjectURL(blob) };
    });
  }

  private async _onExport(variant: Variant): Promise<void> {
    if (!this.engine) return;
    const model = this.model ?? (this.tunedName ? 'tuned' : 'base');
    this.busy = 'building the files…';
    this.error = '';
    try {
      const card = {
        dataset: this.split.train.length
          ? {
              hash: await hashDataset(this.split.train),
              records: this.collection.records.length,
              train: this.split.train.length,
              validation: this.split.validation.length,
            }
          : undefined,
        settings: model === 'tuned' && this.settings ? this.settings : undefined,
        metrics: { base: this.evaluations.base?.summary, tuned: this.evaluations.tuned?.summary },
      };
      const result = await this.engine.call({
        kind: 'export',
        model,
        fp16: variant === 'fp16',
        int8: variant === 'int8' || variant === 'onnx',
        onnx: variant === 'onnx',
        card,
      });
      this.notes = result.notes;
      this.offer(result.files);
    } catch (err) {
      this.error = `The ${variant} export failed: ${(err as Error).message}`;
    } finally {
      this.busy = '';
    }
  }

  private _onData(format: 'jsonl' | 'squad' | 'csv'): void {
    const text = writeDataset(this.collection.records, format);
    const name = format === 'squad' ? 'dataset.squad.json' : `dataset.${format}`;
    this.notes = [];
    this.offer([{ name, bytes: new TextEncoder().encode(text) }]);
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'export-screen': ExportScreen;
  }
}
