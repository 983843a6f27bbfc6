// <export-screen> — taking results out: one ZIP file per model bundle (config, safetensors,
// vocabulary, model card; int8 weights, with their EM/F1 on the workbench's validation
// questions in the card, and ONNX graphs on request) in float32 or
// float16, built in the worker (src/io/export.ts) and zipped here (src/io/bundle.ts),
// each named after its reader and variant so no two downloads share a name. Any reader
// can go: the fine-tuned one in use, the base, or any checkpoint saved in this browser.
// Also the cleaned dataset in each import format (src/data/load.ts writeDataset), and a
// job folder for PyTorch's distributed training as one ZIP (ReaderSession.torchJob: the
// run the Training screen would start, the same folder `spanwright job` writes). Files
// are offered as downloads made from in-memory blobs; nothing is uploaded anywhere.
// No events out.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import { hashDataset } from '../src/data/hash.js';
import { bundleStem, zipBundle } from '../src/io/bundle.js';
import type { CheckpointSummary } from '../src/io/checkpoint-store.js';
import { checkpointLabel } from '../src/session/labels.js';
import type { RunMeta } from '../src/train/finetune.js';
import { writeDataset } from '../src/data/load.js';
import type { Split } from '../src/data/split.js';
import { DEFAULT_TRAIN_CONFIG, type TrainConfig } from '../src/train/config.js';
import type { BaseInfo, EvaluationResult, ModelChoice } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import { emptyDataset, type Dataset } from './workbench-db.js';

/** One download on offer: a model bundle (with the files inside it) or a dataset file. */
interface Offered {
  name: string;
  bytes: number;
  url: string;
  /** a bundle's variant (or a job folder) and which kind of reader it holds; absent for a dataset file */
  variant?: Variant | 'torch-job';
  reader?: 'tuned' | 'base' | 'checkpoint';
  /** a bundle's files, each with its size */
  entries?: Array<{ name: string; bytes: number }>;
}

type Variant = 'fp32' | 'fp16' | 'int8' | 'onnx';

/** What is exported: one of the session's readers, or a checkpoint by id (`checkpoint:<id>`). */
type Source = ModelChoice | `checkpoint:${string}`;

const VARIANTS: ReadonlyArray<{ variant: Variant; label: string; name: string; help: string }> = [
  {
    variant: 'fp32',
    label: 'Model bundle (float32)',
    name: 'float32',
    help: 'one .zip: config.json, model.safetensors, the vocabulary and MODEL_CARD.md',
  },
  { variant: 'fp16', label: 'Model bundle (float16)', name: 'float16', help: 'the same with half-size weights, rounded to binary16' },
  {
    variant: 'int8',
    label: 'Model bundle + int8 weights',
    name: 'float32 int8',
    help: 'adds model.int8.safetensors (per-row symmetric); the card gives its EM/F1 beside float32 on the validation questions held here (its logit drift when there are none)',
  },
  { variant: 'onnx', label: 'Model bundle + ONNX', name: 'float32 onnx', help: 'adds model.onnx (opset 17) and model.int8.onnx' },
];

const TYPES: Record<string, string> = {
  zip: 'application/zip',
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
      pre {
        margin: 0.3rem 0;
        padding: 0.4rem 0.6rem;
        overflow-x: auto;
        background: var(--paper, #fbfbf9);
        border: 1px solid var(--line, #c9d0d4);
        border-radius: 4px;
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
  /** the Training screen's settings, for a job folder (the run it would start) */
  @property({ attribute: false }) trainSettings: TrainConfig | null = null;
  @property({ attribute: false }) evaluations: { base?: EvaluationResult; tuned?: EvaluationResult } = {};

  @state() private source: Source | null = null;
  /** the checkpoints saved in this browser, newest first */
  @state() private checkpoints: CheckpointSummary<RunMeta>[] = [];
  /** newest first */
  @state() private offered: Offered[] = [];
  @state() private busy = '';
  @state() private error = '';
  @state() private notes: string[] = [];

  override connectedCallback(): void {
    super.connectedCallback();
    void this.listCheckpoints();
  }

  private async listCheckpoints(): Promise<void> {
    if (!this.engine) return;
    try {
      const { checkpoints } = await this.engine.call({ kind: 'list-checkpoints' });
      this.checkpoints = [...checkpoints].reverse();
    } catch {
      this.checkpoints = []; // a session without a store: only its readers can go
    }
  }

  override updated(changed: Map<string, unknown>): void {
    // a run or a restore since the list was read may have saved checkpoints
    if (changed.has('tunedName') && changed.get('tunedName') !== undefined) void this.listCheckpoints();
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    for (const f of this.offered) URL.revokeObjectURL(f.url);
  }

  override render() {
    const source = this.currentSource();
    const records = this.collection.records.length;
    return html`
      <h2>Export</h2>
      <section>
        <h3>Reader</h3>
        <div class="row">
          <label
            >Export
            <select id="export-model" @change=${(e: Event) => (this.source = (e.target as HTMLSelectElement).value as Source)}>
              <option value="tuned" ?selected=${source === 'tuned'} ?disabled=${!this.tunedName}>
                the fine-tuned reader in use${this.tunedName ? ` (${this.tunedName})` : ''}
              </option>
              <option value="base" ?selected=${source === 'base'}>the base reader</option>
              ${
                this.checkpoints.length > 0
                  ? html`<optgroup label="Saved checkpoints">
                      ${this.checkpoints.map(
                        (c) =>
                          html`<option value="checkpoint:${c.id}" ?selected=${source === `checkpoint:${c.id}`}>
                            ${checkpointDescription(c)}
                          </option>`,
                      )}
                    </optgroup>`
                  : ''
              }
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
      <section id="torch-job">
        <h3>Train on more cores or GPUs (PyTorch)</h3>
        <p class="muted">
          When this tab is too slow for your questions: one folder that runs the training the Training screen would start — the same
          windows, settings and starting reader — under torch.distributed on a machine with more cores or with GPUs.
        </p>
        <div class="row">
          <button id="export-job" @click=${this._onJob} ?disabled=${!this.baseInfo || this.split.train.length === 0 || this.busy !== ''}>
            Job folder (.zip)
          </button>
          <span class="muted">${this.split.train.length} training and ${this.split.validation.length} validation questions</span>
        </div>
        <p class="muted">Unzip it, and in the folder run, with CPU processes on one machine or one process per GPU:</p>
        <pre id="job-commands"><code>torchrun --standalone --nproc_per_node 2 train_reader.py
torchrun --standalone --nproc_per_node 8 train_reader.py --device cuda</code></pre>
        <p class="muted">
          What it writes in <code>model/</code> is a model directory: choose that folder on the Base reader screen to evaluate, ask or
          export it. The folder's README.txt says more.
        </p>
      </section>
      ${this.busy ? html`<p class="muted">${this.busy}</p>` : ''}
      ${this.error ? html`<p class="note bad" role="alert">${this.error}</p>` : ''}
      ${
        this.offered.length > 0
          ? html`<section id="downloads">
              <h3>Ready to download</h3>
              <ul class="files">
                ${this.offered.map(
                  (f) =>
                    html`<li>
                      <a href=${f.url} download=${f.name} data-file=${f.name} data-variant=${f.variant ?? ''} data-reader=${f.reader ?? ''}
                        >${f.name}</a
                      >
                      <span class="muted">${f.bytes.toLocaleString('en-US')} bytes</span>
                      ${
                        f.entries
                          ? html`<span class="muted"
                              >— holds
                              ${f.entries.map(
                                (e, i) =>
                                  html`${i > 0 ? ', ' : ''}<code data-entry=${e.name}>${e.name}</code>
                                    (${e.bytes.toLocaleString('en-US')})`,
                              )}</span
                            >`
                          : ''
                      }
                    </li>`,
                )}
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

  /** The reader chosen, or the fine-tuned one in use (else the base) until the user chooses. */
  private currentSource(): Source {
    if (this.source?.startsWith('checkpoint:') && !this.checkpoints.some((c) => `checkpoint:${c.id}` === this.source)) return 'base';
    return this.source ?? (this.tunedName ? 'tuned' : 'base');
  }

  /** Adds a download to the top of the list; an earlier one of the same name gives way. */
  private offer(file: { name: string; bytes: Uint8Array } & Omit<Offered, 'url' | 'bytes' | 'name'>): void {
    const ext = file.name.split('.').pop() ?? '';
    const blob = new Blob([file.bytes as Uint8Array<ArrayBuffer>], { type: TYPES[ext] ?? 'application/octet-stream' });
    for (const f of this.offered) if (f.name === file.name) URL.revokeObjectURL(f.url);
    const { bytes, ...rest } = file;
    this.offered = [{ ...rest, bytes: bytes.length, url: URL.createObjectURL(blob) }, ...this.offered.filter((f) => f.name !== file.name)];
  }

  private async _onExport(variant: Variant): Promise<void> {
    if (!this.engine) return;
    const source = this.currentSource();
    const checkpoint = source.startsWith('checkpoint:') ? this.checkpoints.find((c) => `checkpoint:${c.id}` === source) : undefined;
    const v = VARIANTS.find((x) => x.variant === variant)!;
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
        settings: source === 'tuned' && this.settings ? this.settings : undefined,
        metrics: { base: this.evaluations.base?.summary, tuned: this.evaluations.tuned?.summary },
      };
      const int8 = variant === 'int8' || variant === 'onnx';
      const windows = this.settings
        ? { maxLength: this.settings.maxLength, stride: this.settings.stride, maxQueryLength: this.settings.maxQueryLength }
        : {};
      const options = {
        fp16: variant === 'fp16',
        int8,
        onnx: variant === 'onnx',
        // the int8 weights measured on the validation questions the workbench holds (src/io/int8-check.ts)
        ...(int8 && this.split.validation.length > 0 ? { int8Check: { records: this.split.validation, ...windows } } : {}),
      };
      if (options.int8Check)
        this.busy = `building the files and scoring int8 against float32 on ${this.split.validation.length} validation questions…`;
      const result = checkpoint
        ? await this.engine.call({
            kind: 'export-checkpoint',
            id: checkpoint.id,
            ...options,
            // the dataset facts only when the checkpoint was trained on these questions; its own settings and scores come from the store
            card: { dataset: card.dataset?.hash === checkpoint.meta.datasetHash ? card.dataset : undefined },
          })
        : await this.engine.call({ kind: 'export', model: source as ModelChoice, ...options, card });
      const reader = checkpoint
        ? `${checkpointLabel(checkpoint.meta)} ${savedStamp(checkpoint)}`
        : source === 'tuned'
          ? // "run run-x1 at update 16" names the run once: "fine-tuned run-x1 at update 16"
            `fine-tuned ${(this.tunedName ?? '').replace(/^fine-tuned\s*/, '').replace(/^run (?=run-)/, '')}`
          : `base ${this.baseInfo?.name ?? ''}`;
      this.busy = 'packing the bundle…';
      await this.updateComplete; // let the page say so before the zip is written
      const stem = bundleStem({ reader, variant: v.name });
      this.notes = result.notes;
      this.offer({
        name: `${stem}.zip`,
        bytes: zipBundle(result.files, stem),
        variant,
        reader: checkpoint ? 'checkpoint' : source === 'tuned' ? 'tuned' : 'base',
        entries: result.files.map((f) => ({ name: f.name, bytes: f.bytes.length })),
      });
    } catch (err) {
      this.error = `The ${variant} export failed: ${(err as Error).message}`;
    } finally {
      this.busy = '';
    }
  }

  private async _onJob(): Promise<void> {
    if (!this.engine) return;
    const train = this.split.train;
    this.busy = `writing the job folder: ${train.length} questions into windows…`;
    this.error = '';
    try {
      // the folder's name, in the zip and in the README's commands
      const folder = bundleStem({ reader: `torch job ${this.baseInfo?.name ?? ''}`, variant: `${train.length} questions` });
      const job = await this.engine.call({
        kind: 'torch-job',
        train,
        validation: this.split.validation,
        config: { ...(this.trainSettings ?? this.settings ?? DEFAULT_TRAIN_CONFIG) },
        folder,
      });
      this.busy = 'packing the folder…';
      await this.updateComplete;
      this.notes = [
        `the job trains from ${job.startsFrom}: ${job.questions} questions, ${job.windows} windows of ${job.config.maxLength} tokens, ${job.updates} updates`,
        ...job.notes,
      ];
      this.offer({
        name: `${folder}.zip`,
        bytes: zipBundle(job.files, folder),
        variant: 'torch-job',
        entries: job.files.map((f) => ({ name: f.name, bytes: f.bytes.length })),
      });
    } catch (err) {
      this.error = `The job folder failed: ${(err as Error).message}`;
    } finally {
      this.busy = '';
    }
  }

  private _onData(format: 'jsonl' | 'squad' | 'csv'): void {
    const text = writeDataset(this.collection.records, format);
    const name = format === 'squad' ? 'dataset.squad.json' : `dataset.${format}`;
    this.notes = [];
    this.offer({ name, bytes: new TextEncoder().encode(text) });
  }
}

/** A checkpoint as the reader list names it: stage and update, when saved, its validation F1. */
function checkpointDescription(c: CheckpointSummary<RunMeta>): string {
  const f1 = c.meta.metrics.validationF1;
  const when = c.meta.savedAt ? `, saved ${new Date(c.meta.savedAt).toLocaleString()}` : '';
  return `checkpoint: ${checkpointLabel(c.meta)}${when}${f1 === undefined ? '' : `, validation F1 ${f1.toFixed(1)}`}`;
}

/** The time a checkpoint was saved, to the minute, for a file name ("2025-03-02 14-05"); "" when unknown. */
function savedStamp(c: CheckpointSummary<RunMeta>): string {
  if (!c.meta.savedAt) return '';
  const d = new Date(c.meta.savedAt);
  const two = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}-${two(d.getMonth() + 1)}-${two(d.getDate())} ${two(d.getHours())}-${two(d.getMinutes())}`;
}

declare global {
  interface HTMLElementTagNameMap {
    'export-screen': ExportScreen;
  }
}
