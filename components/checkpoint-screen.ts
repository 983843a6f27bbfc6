// <checkpoint-screen> — the checkpoints in this browser's IndexedDB: each with its step,
// label, validation scores and time; restore one as the fine-tuned reader, delete one,
// compare two side by side, prune by a keep-best / keep-last policy, and the storage
// used and still available (with what to do when the quota runs out).
// Each row names the run that saved it. Events out: tuned-change {name, checkpointId}
// after a restore.
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { CheckpointSummary, StoreUsage } from '../src/io/checkpoint-store.js';
import type { RunMeta } from '../src/train/finetune.js';
import { checkpointLabel, metricLabel, runLabel, stageLabel } from '../src/session/labels.js';
import type { BaseInfo } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import { SETTING_LABELS } from './training-screen.js';

const MB = 1024 * 1024;
const mb = (n: number | undefined) => (n === undefined ? '–' : `${(n / MB).toFixed(1)} MB`);
const score = (v: number | undefined) => (v === undefined ? '–' : v.toFixed(2));

@customElement('checkpoint-screen')
export class CheckpointScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      tr.chosen {
        background: #eef4f8;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  /** the fine-tuned reader the worker holds now */
  @property({ attribute: false }) tunedName: string | null = null;
  /** a run is training: deleting and pruning wait */
  @property({ type: Boolean }) running = false;

  @state() private checkpoints: CheckpointSummary<RunMeta>[] = [];
  @state() private usage: StoreUsage | null = null;
  @state() private compare = new Set<string>();
  @state() private message = '';
  @state() private error = '';
  @state() private keepBest = 1;
  @state() private keepLast = 2;

  override connectedCallback(): void {
    super.connectedCallback();
    void this.refresh();
  }

  private async refresh(): Promise<void> {
    if (!this.engine) return;
    try {
      const { checkpoints, usage } = await this.engine.call({ kind: 'list-checkpoints' });
      this.checkpoints = [...checkpoints].reverse(); // newest first
      this.usage = usage;
    } catch (err) {
      this.error = (err as Error).message;
    }
  }

  override render() {
    const u = this.usage;
    const free = u?.originQuota !== undefined && u.originUsage !== undefined ? u.originQuota - u.originUsage : undefined;
    const largest = Math.max(0, ...this.checkpoints.map((c) => c.bytes));
    return html`
      <h2>Checkpoints</h2>
      <section>
        <p id="storage">
          Checkpoints take <strong>${mb(u?.bytes)}</strong>; this site uses ${mb(u?.originUsage)} of the ${mb(u?.originQuota)} the browser
          allows (${mb(free)} free).
        </p>
        ${
          free !== undefined && largest > 0 && free < 3 * largest
            ? html`<p class="note warn">
                Room for fewer than three more checkpoints of this size. A save that does not fit is refused and the checkpoints already
                saved stay intact; delete or prune some, or keep fewer per run.
              </p>`
            : html`<p class="muted">
                The browser's quota is shared by everything this site stores. When a save would not fit, it is refused whole — nothing
                half-written — and the run reports it; delete or prune checkpoints, then continue.
              </p>`
        }
        <div class="row">
          <label
            >Keep best
            <input
              type="number"
              min="0"
              step="1"
              .value=${String(this.keepBest)}
              @change=${(e: Event) => (this.keepBest = Number((e.target as HTMLInputElement).value))}
          /></label>
          <label
            >and last
            <input
              type="number"
              min="0"
              step="1"
              .value=${String(this.keepLast)}
              @change=${(e: Event) => (this.keepLast = Number((e.target as HTMLInputElement).value))}
          /></label>
          <button id="prune" @click=${this._onPrune} ?disabled=${this.running || this.checkpoints.length === 0}>Prune the rest</button>
          <button @click=${() => this.refresh()}>Refresh</button>
        </div>
        ${this.message ? html`<p class="note" role="status">${this.message}</p>` : ''}
        ${this.error ? html`<p class="note bad" role="alert">${this.error}</p>` : ''}
        <p class="muted">Fine-tuned reader in use: ${this.tunedName ?? 'none'}</p>
      </section>
      <section>
        ${
          this.checkpoints.length === 0
            ? html`<p class="muted" id="no-checkpoints">
                No checkpoints yet: a training run saves one at every evaluation and when it is paused.
              </p>`
            : html`<div class="scroll">
                <table id="checkpoint-table">
                  <thead>
                    <tr>
                      <th>Compare</th>
                      <th>Run</th>
                      <th>Checkpoint</th>
                      <th>Stage</th>
                      <th class="num">Update</th>
                      <th>Why</th>
                      <th class="num">EM</th>
                      <th class="num">F1</th>
                      <th>Saved</th>
                      <th class="num">Size</th>
                      <th></th>
                    </tr>
                  </thead>
                  <tbody>
                    ${this.checkpoints.map(
                      (c) =>
                        html`<tr class=${this.compare.has(c.id) ? 'chosen' : ''} data-id=${c.id}>
                          <td>
                            <input
                              type="checkbox"
                              aria-label="Compare ${checkpointLabel(c.meta)}"
                              .checked=${this.compare.has(c.id)}
                              @change=${() => this._onToggleCompare(c.id)}
                            />
                          </td>
                          <td class="run">${runLabel(c.meta)}</td>
                          <td>${checkpointLabel(c.meta)} <code class="muted id">${c.id}</code></td>
                          <td class="stage">${stageLabel(c.meta.stage)}</td>
                          <td class="num">${c.meta.step}</td>
                          <td>${c.meta.label ?? ''}</td>
                          <td class="num">${score(c.meta.metrics.validationEM)}</td>
                          <td class="num">${score(c.meta.metrics.validationF1)}</td>
                          <td>${c.meta.savedAt ? new Date(c.meta.savedAt).toLocaleString() : ''}</td>
                          <td class="num">${mb(c.bytes)}</td>
                          <td>
                            <button class="restore" @click=${() => this._onRestore(c.id)} ?disabled=${!this.baseInfo}>Restore</button>
                            <button class="delete" @click=${() => this._onDelete(c.id)} ?disabled=${this.running}>Delete</button>
                          </td>
                        </tr>`,
                    )}
                  </tbody>
                </table>
              </div>`
        }
        ${this.renderComparison()}
      </section>
    `;
  }

  private renderComparison() {
    const chosen = this.checkpoints.filter((c) => this.compare.has(c.id));
    if (chosen.length < 2) return html`<p class="muted">Tick two or more checkpoints to compare them.</p>`;
    const keys = [...new Set(chosen.flatMap((c) => Object.keys(c.meta.metrics)))].sort();
    const settings = ['learningRate', 'batchSize', 'epochs', 'maxLength', 'seed'] as const;
    return html`<h3>Comparison</h3>
      <div class="scroll">
        <table id="comparison">
          <thead>
            <tr>
              <th></th>
              ${chosen.map((c) => html`<th class="num">${checkpointLabel(c.meta)}</th>`)}
            </tr>
          </thead>
          <tbody>
            ${keys.map(
              (k) =>
                html`<tr>
                  <th>${metricLabel(k)}</th>
                  ${chosen.map((c) => html`<td class="num">${score(c.meta.metrics[k])}</td>`)}
                </tr>`,
            )}
            ${settings.map(
              (k) =>
                html`<tr>
                  <th>${SETTING_LABELS[k]}</th>
                  ${chosen.map((c) => html`<td class="num">${String(c.meta.runConfig?.train?.[k] ?? '–')}</td>`)}
                </tr>`,
            )}
            <tr>
              <th>Run</th>
              ${chosen.map((c) => html`<td class="num">${runLabel(c.meta)}</td>`)}
            </tr>
            <tr>
              <th>Base reader</th>
              ${chosen.map((c) => html`<td class="num">${c.meta.runConfig?.base ?? '–'}</td>`)}
            </tr>
          </tbody>
        </table>
      </div>`;
  }

  private _onToggleCompare(id: string): void {
    const next = new Set(this.compare);
    if (next.has(id)) next.delete(id);
    else next.add(id);
    this.compare = next;
  }

  private async _onRestore(id: string): Promise<void> {
    if (!this.engine) return;
    this.error = '';
    try {
      const r = await this.engine.call({ kind: 'restore-checkpoint', id });
      if (r.stage === 'practice' || r.stage === 'domain') {
        this.message = `Restored the ${r.label} checkpoint as the reader the next fine-tuning run starts from.`;
      } else {
        this.message = `Restored the ${r.label} checkpoint${r.run ? ` of ${r.run}` : ''} as the fine-tuned reader.`;
        // a checkpoint from before runs had names is called by its label
        const name = r.run ? r.name : `${r.label} (restored checkpoint)`;
        this.dispatchEvent(new CustomEvent('tuned-change', { detail: { name, checkpointId: id }, bubbles: true, composed: true }));
      }
    } catch (err) {
      this.error = (err as Error).message;
    }
  }

  private async _onDelete(id: string): Promise<void> {
    if (!this.engine) return;
    this.error = '';
    await this.engine.call({ kind: 'delete-checkpoint', id });
    const gone = this.checkpoints.find((c) => c.id === id);
    this.message = `Deleted the ${gone ? checkpointLabel(gone.meta) : id} checkpoint.`;
    await this.refresh();
  }

  private async _onPrune(): Promise<void> {
    if (!this.engine) return;
    const { deleted } = await this.engine.call({ kind: 'prune-checkpoints', keepBest: this.keepBest, keepLast: this.keepLast });
    this.message = deleted.length ? `Deleted ${deleted.length} checkpoint(s).` : 'Nothing to prune under this policy.';
    await this.refresh();
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'checkpoint-screen': CheckpointScreen;
  }
}
