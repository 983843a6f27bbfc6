// <data-screen> — bringing questions in: import SQuAD 1.1/2.0 JSON, JSONL or CSV files
// (picker or drag and drop) as training questions, or a validation file kept as the
// validation set, with the validation report of each file (questions already present
// summed up in one line, their details folded); the demo data; the choice between a split
// by passage and the imported validation questions; the dataset's statistics
// (<dataset-stats>) and the labelling of plain passages (<passage-labeller>), each
// question marked training or validation.
// Events out: dataset-change {dataset, edits?}, split-change {split}.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import { loadDataset } from '../src/data/load.js';
import { alreadyPresentSummary, mergeRecords, type MergeResult } from '../src/data/merge.js';
import { DEFAULT_SPLIT, sharedPassages, type Split } from '../src/data/split.js';
import { formatProblem, type Problem } from '../src/data/validate.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import type { QuestionEdit } from '../src/session/edit-history.js';
import { emptyDataset, type Dataset, type SplitSettings } from './workbench-db.js';
import './dataset-stats.js';
import './passage-labeller.js';

/** What an imported file's questions are for: training, or the validation set as given. */
export type ImportRole = 'train' | 'validation';

/** The report of one imported file. */
interface ImportReport {
  file: string;
  role: ImportRole;
  format: string | null;
  added: number;
  /** one per question skipped as already present, shown folded under one line */
  alreadyPresent: Problem[];
  problems: Problem[];
}

/** The dataset with a merge's records and passages added (src/data/merge.ts decides which). */
export function addMerged(dataset: Dataset, merged: MergeResult, file: string, role: ImportRole): Dataset {
  return {
    records: [...dataset.records, ...merged.added],
    passages: [...dataset.passages, ...merged.newPassages],
    sources: [...dataset.sources, file],
    validationIds: role === 'validation' ? [...dataset.validationIds, ...merged.added.map((r) => r.id)] : dataset.validationIds,
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
      details.already summary {
        cursor: pointer;
      }
      fieldset {
        border: 1px solid var(--line, #ccc);
        border-radius: 6px;
        margin: 0.5rem 0;
      }
    `,
  ];

  /** the engine client, passed on to the statistics (token counts need the tokenizer) */
  @property({ attribute: false }) engine: EngineClient | null = null;
  /** the dataset: questions and passages */
  @property({ attribute: false }) collection: Dataset = emptyDataset();
  /** by passage, or the questions imported as validation, with the passage split's share and seed */
  @property({ attribute: false }) splitSettings: SplitSettings = DEFAULT_SPLIT;
  /** the split of `collection` under `splitSettings` (made by the shell, src/data/split.ts chooseSplit) */
  @property({ attribute: false }) split: Split = { train: [], validation: [] };
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  @property({ attribute: false }) settings: TrainConfig | null = null;
  /** the labeller's undo history, kept by the shell */
  @property({ attribute: false }) edits: QuestionEdit[] = [];

  @state() private reports: ImportReport[] = [];
  @state() private dragging = false;
  @state() private busy = '';
  /** the question the labeller should show (a problem's link) */
  @state() private focusId: string | null = null;

  override render() {
    const d = this.collection;
    const split = this.split;
    const mode = this.splitSettings.mode;
    const shared = sharedPassages(split).length;
    const validationSide = new Set(split.validation.map((r) => r.id));
    return html`
      <h2>Data</h2>
      <section>
        <h3>Import questions</h3>
        <p class="muted">
          SQuAD 1.1 or 2.0 JSON, JSONL (one question per line) or CSV. Every record is checked; problems are listed below with the record
          they concern (counted from 1).
        </p>
        <div
          class="drop ${this.dragging ? 'over' : ''}"
          @dragover=${this._onDragOver}
          @dragleave=${this._onDragLeave}
          @drop=${this._onDrop}
        >
          <label>
            Choose training files
            <input id="import-files" type="file" multiple accept=".json,.jsonl,.ndjson,.csv,.tsv" @change=${this._onPick} />
          </label>
          <div class="muted">or drop them here</div>
        </div>
        <div class="row spaced">
          <label>
            Choose a validation file
            <input id="import-validation" type="file" multiple accept=".json,.jsonl,.ndjson,.csv,.tsv" @change=${this._onPickValidation} />
          </label>
          <span class="muted">its questions are kept as the validation set (“Use my validation file” below)</span>
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
        <h3>Training and validation</h3>
        <fieldset>
          <legend>Validation questions</legend>
          <div class="row">
            <label
              ><input
                id="split-mode-passage"
                type="radio"
                name="split-mode"
                value="passage"
                .checked=${mode === 'passage'}
                @change=${this._onSplitInput}
              />
              Split by passage</label
            >
            <span class="muted">whole passages go to validation, so validation measures reading unseen text</span>
          </div>
          <div class="row">
            <label
              >Validation share
              <input
                id="split-fraction"
                type="number"
                min="0"
                max="0.9"
                step="0.05"
                ?disabled=${mode !== 'passage'}
                .value=${String(this.splitSettings.validationFraction)}
                @change=${this._onSplitInput}
            /></label>
            <label
              >Seed
              <input
                id="split-seed"
                type="number"
                step="1"
                ?disabled=${mode !== 'passage'}
                .value=${String(this.splitSettings.seed)}
                @change=${this._onSplitInput}
            /></label>
          </div>
          <div class="row">
            <label
              ><input
                id="split-mode-file"
                type="radio"
                name="split-mode"
                value="file"
                .checked=${mode === 'file'}
                @change=${this._onSplitInput}
              />
              Use my validation file</label
            >
            <span class="muted">
              the ${d.validationIds.length} question(s) imported as validation validate as they are; every other question trains
            </span>
          </div>
        </fieldset>
        <p id="split-counts" data-mode=${mode}>
          ${split.train.length} training and ${split.validation.length} validation questions
          (${new Set(split.train.map((r) => r.passageId)).size} and ${new Set(split.validation.map((r) => r.passageId)).size} passages)
        </p>
        ${
          mode === 'file' && d.validationIds.length === 0
            ? html`<p class="note warn" id="no-validation-file">No questions were imported as validation yet: choose a validation file.</p>`
            : ''
        }
        ${
          shared > 0
            ? html`<p class="note warn" id="shared-passages">
                ${shared} passage(s) have questions on both sides, so validation partly measures recall of passages seen in training.
              </p>`
            : ''
        }
      </section>

      <dataset-stats
        .engine=${this.engine}
        .collection=${d}
        .split=${split}
        .splitMode=${mode}
        .baseInfo=${this.baseInfo}
        .settings=${this.settings}
      ></dataset-stats>

      <passage-labeller
        .collection=${d}
        .focusId=${this.focusId}
        .validationSide=${validationSide}
        .edits=${this.edits}
        @dataset-change=${this._onLabelled}
      ></passage-labeller>
    `;
  }

  private renderReport(r: ImportReport) {
    const errors = r.problems.filter((p) => p.severity === 'error').length;
    const kept = new Set(this.collection.records.map((x) => x.id));
    const item = (p: Problem) =>
      html`<li class=${p.severity}>
        ${formatProblem(p)}
        ${
          p.id !== undefined && kept.has(p.id)
            ? html`<button @click=${() => this._onShowRecord(p.id!)} title="Show this question in the editor">show record</button>`
            : p.record >= 0
              ? html`<span class="muted">(not added)</span>`
              : ''
        }
      </li>`;
    return html`<div class="import-report" data-file=${r.file} data-role=${r.role}>
      <p class=${errors > 0 ? 'note warn' : 'note'}>
        <strong>${r.file}</strong>${r.role === 'validation' ? ' (validation)' : ''}: ${r.format ? `read as ${r.format}` : 'not read'};
        ${r.added} question(s) added, ${errors} error(s), ${r.problems.length - errors} warning(s).
      </p>
      ${
        r.problems.some((p) => p.code === 'unknown-format') && /\.txt$/i.test(r.file)
          ? html`<p class="muted">To label plain passages, load text files under “Add a passage” below.</p>`
          : ''
      }
      ${
        r.alreadyPresent.length > 0
          ? html`<details class="already">
              <summary>${alreadyPresentSummary(r.alreadyPresent.length)}</summary>
              <ul class="problems">
                ${r.alreadyPresent.slice(0, 500).map(item)}
                ${r.alreadyPresent.length > 500 ? html`<li>… ${r.alreadyPresent.length - 500} more</li>` : ''}
              </ul>
            </details>`
          : ''
      }
      ${
        r.problems.length > 0
          ? html`<ul class="problems">
              ${r.problems.slice(0, 500).map(item)} ${r.problems.length > 500 ? html`<li>… ${r.problems.length - 500} more</li>` : ''}
            </ul>`
          : ''
      }
    </div>`;
  }

  /** `edits`: the undo history after a labelling change; absent for an import or a clear, whose changes undo does not cover. */
  private emitDataset(dataset: Dataset, edits?: QuestionEdit[]): void {
    this.dispatchEvent(new CustomEvent('dataset-change', { detail: { dataset, edits }, bubbles: true, composed: true }));
  }

  private async importFiles(files: Array<{ name: string; bytes: Uint8Array; role: ImportRole }>): Promise<void> {
    let dataset = this.collection;
    const reports: ImportReport[] = [];
    for (const f of files) {
      this.busy = `reading ${f.name}…`;
      await new Promise((r) => setTimeout(r, 0)); // let the notice paint
      const loaded = loadDataset(f.bytes, f.name);
      const merged = mergeRecords(dataset, loaded.records, f.name, loaded.indices);
      dataset = addMerged(dataset, merged, f.name, f.role);
      reports.push({
        file: f.name,
        role: f.role,
        format: loaded.format,
        added: merged.added.length,
        alreadyPresent: merged.alreadyPresent,
        problems: [...loaded.problems, ...merged.problems],
      });
    }
    this.busy = '';
    this.reports = reports;
    this.emitDataset(dataset);
    // a validation file is imported to be the validation set
    if (files.some((f) => f.role === 'validation') && this.splitSettings.mode !== 'file')
      this.emitSplit({ ...this.splitSettings, mode: 'file' });
  }

  private static async read(
    files: FileList | null,
    role: ImportRole,
  ): Promise<Array<{ name: string; bytes: Uint8Array; role: ImportRole }>> {
    return Promise.all([...(files ?? [])].map(async (f) => ({ name: f.name, bytes: new Uint8Array(await f.arrayBuffer()), role })));
  }

  private async _onPick(e: Event): Promise<void> {
    const input = e.target as HTMLInputElement;
    await this.importFiles(await DataScreen.read(input.files, 'train'));
    input.value = '';
  }

  private async _onPickValidation(e: Event): Promise<void> {
    const input = e.target as HTMLInputElement;
    await this.importFiles(await DataScreen.read(input.files, 'validation'));
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
    await this.importFiles(await DataScreen.read(e.dataTransfer?.files ?? null, 'train'));
  }

  private async _onLoadDemo(): Promise<void> {
    this.busy = 'fetching the demo data…';
    try {
      const files = await Promise.all(
        (
          [
            ['train.jsonl', 'train'],
            ['validation.jsonl', 'validation'],
          ] as const
        ).map(async ([name, role]) => {
          const response = await fetch(`demo/${name}`);
          if (!response.ok) throw new Error(`demo/${name}: the server answered ${response.status}`);
          return { name, bytes: new Uint8Array(await response.arrayBuffer()), role };
        }),
      );
      await this.importFiles(files);
    } catch (err) {
      this.busy = '';
      this.reports = [
        {
          file: 'demo data',
          role: 'train',
          format: null,
          added: 0,
          alreadyPresent: [],
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
    const value = (id: string) => (this.renderRoot.querySelector(`#${id}`) as HTMLInputElement).value;
    const fraction = Number(value('split-fraction'));
    const seed = Number(value('split-seed'));
    const mode = (this.renderRoot.querySelector('#split-mode-file') as HTMLInputElement).checked ? 'file' : 'passage';
    if (!(fraction >= 0 && fraction < 1) || !Number.isInteger(seed)) return;
    this.emitSplit({ mode, validationFraction: fraction, seed });
  }

  private emitSplit(split: SplitSettings): void {
    this.dispatchEvent(new CustomEvent('split-change', { detail: { split }, bubbles: true, composed: true }));
  }

  private _onShowRecord(id: string): void {
    this.focusId = id;
    this.renderRoot.querySelector('passage-labeller')?.scrollIntoView({ behavior: 'smooth', block: 'start' });
  }

  private _onLabelled(e: CustomEvent<{ dataset: Dataset; edits: QuestionEdit[] }>): void {
    // re-sent from here, so the shell hears one source
    e.stopPropagation();
    this.emitDataset(e.detail.dataset, e.detail.edits);
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'data-screen': DataScreen;
  }
}
