// <data-screen> — bringing questions in: import SQuAD JSON, JSONL or CSV files (picker
// or drag and drop) with the validation report of each file, the demo data, the
// train/validation split by passage, the dataset's statistics (<dataset-stats>) and the
// labelling of plain passages (<passage-labeller>).
// Events out: dataset-change {dataset}, split-change {split}.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import { loadDataset } from '../src/data/load.js';
import type { QARecord } from '../src/data/record.js';
import type { Split } from '../src/data/split.js';
import { formatProblem, type Problem } from '../src/data/validate.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import { emptyDataset, type Dataset, type SplitSettings } from './workbench-db.js';
import './dataset-stats.js';
import './passage-labeller.js';

/** The report of one imported file. */
interface ImportReport {
  file: string;
  format: string | null;
  added: number;
  problems: Problem[];
}

/** Adds records (and the passages they use) to a dataset; ids already present are reported, not added. */
export function mergeRecords(
  dataset: Dataset,
  records: readonly QARecord[],
  file: string,
): { dataset: Dataset; added: number; problems: Problem[] } {
  const ids = new Set(dataset.records.map((r) => r.id));
  const passages = new Map(dataset.passages.map((p) => [p.id, p]));
  const problems: Problem[] = [];
  const added: QARecord[] = [];
  records.forEach((r, index) => {
    const known = passages.get(r.passageId);
    if (ids.has(r.id)) {
      problems.push({
        severity: 'error',
        file,
        record: index,
        id: r.id,
        field: 'id',
        message: `id "${r.id}" is already in the dataset; this question was not added`,
        code: 'duplicate-id',
      });
      return;
    }
    if (known && known.text !== r.context) {
      problems.push({
        severity: 'error',
        file,
        record: index,
        id: r.id,
        field: 'context',
        message: `passage "${r.passageId}" is already in the dataset with a different text; this question was not added`,
        code: 'passage-conflict',
      });
      return;
    }
    if (!known) passages.set(r.passageId, { id: r.passageId, text: r.context });
    ids.add(r.id);
    added.push(r);
  });
  return {
    dataset: { records: [...dataset.records, ...added], passages: [...passages.values()], sources: [...dataset.sources, file] },
    added: added.length,
    problems,
  };
}

@customElement('data-screen')
export class DataScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      .drop {
        border: 2px dashed var(--line, #ccc);
        border-radius: 6px;
        padding: 1rem;
        text-align: center;
      }
      .drop.over {
        border-color: var(--accent, #1f5f8b);
        background: #eef4f8;
      }
      .problems {
        max-height: 18rem;
        overflow: auto;
        margin: 0.25rem 0;
        padding-left: 1.2rem;
      }
      .problems li.error {
        color: var(--bad, #a3262a);
      }
      .problems li.warning {
        color: var(--warn, #8a5a00);
      }
      .problems button {
        padding: 0 0.4rem;
        font-size: 0.85rem;
      }
    `,
  ];

  /** the engine client, passed on to the statistics (token counts need the tokenizer) */
  @property({ attribute: false }) engine: EngineClient | null = null;
  /** the dataset: questions and passages */
  @property({ attribute: false }) collection: Dataset = emptyDataset();
  @property({ attribute: false }) splitSettings: SplitSettings = { validationFraction: 0.15, seed: 42 };
  /** the split of `dataset` under `splitSettings` */
  @property({ attribute: false }) split: Split = { train: [], validation: [] };
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) settings: TrainConfig | null = null;

  @state() private reports: ImportReport[] = [];
  @state() private dragging = false;
  @state() private busy = '';
  /** the question the labeller should show (a problem's link) */
  @state() private focusId: string | null = null;

  override render() {
    const d = this.collection;
    return html`
      <h2>Data</h2>
      <section>
        <h3>Import questions</h3>
        <p class="muted">
          SQuAD 2.0 JSON, JSONL (one question per line) or CSV. Every record is checked; problems are listed below with the record they
          concern.
        </p>
        <div
          class="drop ${this.dragging ? 'over' : ''}"
          @dragover=${this._onDragOver}
          @dragleave=${this._onDragLeave}
          @drop=${this._onDrop}
        >
          <label>
            Choose files
            <input id="import-files" type="file" multiple accept=".json,.jsonl,.ndjson,.csv,.tsv" @change=${this._onPick} />
          </label>
          <div class="muted">or drop them here</div>
        </div>
        <div class="row spaced">
          <button id="load-demo" @click=${this._onLoadDemo} ?disabled=${this.busy !== ''}>
            Load the demo data (invented ferry handbook)
          </button>
          <button id="clear-dataset" @click=${this._onClear} ?disabled=${d.records.length === 0 && d.passages.length === 0}>
            Clear the dataset
          </button>
          ${this.busy ? html`<span class="muted">${this.busy}</span>` : ''}
        </div>
        ${this.reports.map((r) => this.renderReport(r))}
      </section>

      <section>
        <h3>Split by passage</h3>
        <p class="muted">Whole passages go to validation, so validation measures reading unseen text.</p>
        <div class="row">
          <label
            >Validation share
            <input
              id="split-fraction"
              type="number"
              min="0"
              max="0.9"
              step="0.05"
              .value=${String(this.splitSettings.validationFraction)}
              @change=${this._onSplitInput}
          /></label>
          <label
            >Seed <input id="split-seed" type="number" step="1" .value=${String(this.splitSettings.seed)} @change=${this._onSplitInput}
          /></label>
          <span id="split-counts">
            ${this.split.train.length} training and ${this.split.validation.length} validation questions
            (${new Set(this.split.train.map((r) => r.passageId)).size} and ${new Set(this.split.validation.map((r) => r.passageId)).size}
            passages)
          </span>
        </div>
      </section>

      <dataset-stats
        .engine=${this.engine}
        .collection=${d}
        .split=${this.split}
        .baseInfo=${this.baseInfo}
        .settings=${this.settings}
      ></dataset-stats>

      <passage-labeller .collection=${d} .focusId=${this.focusId} @dataset-change=${this._onLabelled}></passage-labeller>
    `;
  }

  private renderReport(r: ImportReport) {
    const errors = r.problems.filter((p) => p.severity === 'error').length;
    const kept = new Set(this.collection.records.map((x) => x.id));
    return html`<div class="import-report" data-file=${r.file}>
      <p class=${errors > 0 ? 'note warn' : 'note'}>
        <strong>${r.file}</strong>: read as ${r.format ?? 'unreadable'}; ${r.added} question(s) added, ${errors} error(s),
        ${r.problems.length - errors} warning(s).
      </p>
      ${
        r.problems.length > 0
          ? html`<ul class="problems">
              ${r.problems
                .slice(0, 500)
                .map(
                  (p) =>
                    html`<li class=${p.severity}>
                      ${formatProblem(p)}
                      ${
                        p.id !== undefined && kept.has(p.id)
                          ? html`<button @click=${() => this._onShowRecord(p.id!)} title="Show this question in the editor">
                              show record
                            </button>`
                          : p.record >= 0
                            ? html`<span class="muted">(not added)</span>`
                            : ''
                      }
                    </li>`,
                )}
              ${r.problems.length > 500 ? html`<li>… ${r.problems.length - 500} more</li>` : ''}
            </ul>`
          : ''
      }
    </div>`;
  }

  private emitDataset(dataset: Dataset): void {
    this.dispatchEvent(new CustomEvent('dataset-change', { detail: { dataset }, bubbles: true, composed: true }));
  }

  private async importFiles(files: Array<{ name: string; bytes: Uint8Array }>): Promise<void> {
    let dataset = this.collection;
    const reports: ImportReport[] = [];
    for (const f of files) {
      this.busy = `reading ${f.name}…`;
      await new Promise((r) => setTimeout(r, 0)); // let the notice paint
      const loaded = loadDataset(f.bytes, f.name);
      const merged = mergeRecords(dataset, loaded.records, f.name);
      dataset = merged.dataset;
      reports.push({ file: f.name, format: loaded.format, added: merged.added, problems: [...loaded.problems, ...merged.problems] });
    }
    this.busy = '';
    this.reports = reports;
    this.emitDataset(dataset);
  }

  private async _onPick(e: Event): Promise<void> {
    const input = e.target as HTMLInputElement;
    const files = [...(input.files ?? [])];
    await this.importFiles(await Promise.all(files.map(async (f) => ({ name: f.name, bytes: new Uint8Array(await f.arrayBuffer()) }))));
    input.value = '';
  }

  private _onDragOver(e: DragEvent): void {
    e.preventDefault();
    this.dragging = true;
  }

  private _onDragLeave(): void {
    this.dragging = false;
  }

  private async _onDrop(e: DragEvent): Promise<void> {
    e.preventDefault();
    this.dragging = false;
    const files = [...(e.dataTransfer?.files ?? [])];
    await this.importFiles(await Promise.all(files.map(async (f) => ({ name: f.name, bytes: new Uint8Array(await f.arrayBuffer()) }))));
  }

  private async _onLoadDemo(): Promise<void> {
    this.busy = 'fetching the demo data…';
    try {
      const files = await Promise.all(
        ['train.jsonl', 'validation.jsonl'].map(async (name) => {
          const response = await fetch(`demo/${name}`);
          if (!response.ok) throw new Error(`demo/${name}: the server answered ${response.status}`);
          return { name, bytes: new Uint8Array(await response.arrayBuffer()) };
        }),
      );
      await this.importFiles(files);
    } catch (err) {
      this.busy = '';
      this.reports = [
        {
          file: 'demo data',
          format: null,
          added: 0,
          problems: [{ severity: 'error', file: 'demo data', record: -1, field: '', message: (err as Error).message }],
        },
      ];
    }
  }

  private _onClear(): void {
    if (!confirm('Remove every question and passage from the workbench? Exported files are not affected.')) return;
    this.reports = [];
    this.emitDataset(emptyDataset());
  }

  private _onSplitInput(): void {
    const fraction = Number((this.renderRoot.querySelector('#split-fraction') as HTMLInputElement).value);
    const seed = Number((this.renderRoot.querySelector('#split-seed') as HTMLInputElement).value);
    if (!(fraction >= 0 && fraction < 1) || !Number.isInteger(seed)) return;
    const split: SplitSettings = { validationFraction: fraction, seed };
    this.dispatchEvent(new CustomEvent('split-change', { detail: { split }, bubbles: true, composed: true }));
  }

  private _onShowRecord(id: string): void {
    this.focusId = id;
    this.renderRoot.querySelector('passage-labeller')?.scrollIntoView({ behavior: 'smooth', block: 'start' });
  }

  private _onLabelled(e: CustomEvent<{ dataset: Dataset }>): void {
    // re-sent from here, so the shell hears one source
    e.stopPropagation();
    this.emitDataset(e.detail.dataset);
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'data-screen': DataScreen;
  }
}
