// <reader-screen> — choosing the base reader: the one shipped with the workbench
// (tiny-models/base, when this build has it) or a checkpoint folder of the user's own
// (config.json + model.safetensors + vocab.txt or tokenizer.json) by picker or drop.
// Shows its size, a memory estimate for the current settings, and an epoch-time estimate
// measured by timing real training updates in the worker.
// Events out: base-change {base} (a StoredBase with the files).
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { Split } from '../src/data/split.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo, ModelFiles, StepTiming } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import type { StoredBase } from './workbench-db.js';

const MB = 1024 * 1024;

/** Formats milliseconds as "1 h 02 min", "3 min 05 s" or "4.2 s". */
export function formatDuration(ms: number): string {
  if (!Number.isFinite(ms)) return '–';
  const s = ms / 1000;
  if (s < 60) return `${s.toFixed(1)} s`;
  const m = Math.floor(s / 60);
  if (m < 60) return `${m} min ${String(Math.round(s - 60 * m)).padStart(2, '0')} s`;
  return `${Math.floor(m / 60)} h ${String(m % 60).padStart(2, '0')} min`;
}

/**
 * A rough memory estimate for training, our own count: weights, gradients and AdamW's two
 * moments at 4 bytes each (16 B per parameter), plus the activations one micro-batch keeps
 * for the backward pass — per layer about B·T·(12·H + 2·I) floats for the dense parts and
 * 3·B·N·T² for attention scores, probabilities and their dropout mask.
 */
export function memoryEstimate(info: BaseInfo, settings: TrainConfig): { weights: number; training: number; activations: number } {
  const { hiddenSize: H, intermediateSize: I, numLayers: L, numHeads: N } = info.config;
  const B = settings.batchSize;
  const T = settings.maxLength;
  const activations = 4 * L * (B * T * (12 * H + 2 * I) + 3 * B * N * T * T);
  return { weights: 4 * info.params.total, training: 16 * info.params.total, activations };
}

@customElement('reader-screen')
export class ReaderScreen extends LitElement {
  static override styles = [
    screenStyles,
    css`
      .drop {
        border: 2px dashed var(--line, #ccc);
        border-radius: 6px;
        padding: 1rem;
      }
      .drop.over {
        border-color: var(--accent, #1f5f8b);
        background: #eef4f8;
      }
      dl {
        display: grid;
        grid-template-columns: max-content auto;
        gap: 0.15rem 1rem;
      }
      dt {
        color: var(--muted, #666);
      }
      dd {
        margin: 0;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  /** the loaded base reader, null before one is chosen */
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  /** the last loading error, from the shell */
  @property({ attribute: false }) baseError = '';
  /** true while the worker loads a reader */
  @property({ type: Boolean }) busy = false;
  @property({ attribute: false }) settings: TrainConfig | null = null;
  @property({ attribute: false }) split: Split = { train: [], validation: [] };

  @state() private shipped: string[] | null = null;
  @state() private message = '';
  @state() private timing: StepTiming | null = null;
  @state() private timingBusy = false;
  @state() private dragging = false;

  override connectedCallback(): void {
    super.connectedCallback();
    // precache.json lists the shipped base files the build found (vite.config.ts)
    fetch('precache.json')
      .then((r) => r.json() as Promise<{ base?: string[] }>)
      .then((list) => (this.shipped = list.base ?? []))
      .catch(() => (this.shipped = []));
  }

  override render() {
    const info = this.baseInfo;
    const hasShipped =
      this.shipped !== null && this.shipped.includes('base/config.json') && this.shipped.includes('base/model.safetensors');
    return html`
      <h2>Base reader</h2>
      <section>
        <h3>Choose the reader to start from</h3>
        <div class="row">
          <button id="use-shipped" class="primary" @click=${this._onShipped} ?disabled=${!hasShipped || this.busy}>
            Use the shipped base reader
          </button>
          ${
            this.shipped !== null && !hasShipped
              ? html`<span class="note warn" id="no-shipped"
                  >This build has no shipped base reader yet (tiny-models/base/ was not built when the workbench was). Import a checkpoint
                  folder instead.</span
                >`
              : ''
          }
        </div>
        <div
          class="drop spaced ${this.dragging ? 'over' : ''}"
          @dragover=${this._onDragOver}
          @dragleave=${() => (this.dragging = false)}
          @drop=${this._onDrop}
        >
          <p>
            A checkpoint folder: <code>config.json</code>, <code>model.safetensors</code> (common BERT names), and <code>vocab.txt</code> or
            <code>tokenizer.json</code>.
          </p>
          <div class="row">
            <label>Choose the folder <input id="model-folder" type="file" webkitdirectory @change=${this._onPick} /></label>
            <label
              >or its files <input id="model-files" type="file" multiple accept=".json,.safetensors,.txt" @change=${this._onPick}
            /></label>
          </div>
          <div class="muted">or drop the files here</div>
        </div>
        ${this.busy ? html`<p class="muted">loading the reader…</p>` : ''}
        ${this.message ? html`<p class="note bad" role="alert">${this.message}</p>` : ''}
        ${this.baseError ? html`<p class="note bad" role="alert" id="base-error">${this.baseError}</p>` : ''}
      </section>
      ${info ? this.renderInfo(info) : html`<p class="muted">No base reader loaded.</p>`}
    `;
  }

  private renderInfo(info: BaseInfo) {
    const c = info.config;
    const mem = this.settings ? memoryEstimate(info, this.settings) : null;
    const t = this.timing;
    return html`<section id="base-info">
      <h3>${info.name}</h3>
      <dl>
        <dt>Parameters</dt>
        <dd id="param-count">
          ${info.params.total.toLocaleString('en-US')} (encoder ${info.params.encoder.toLocaleString('en-US')}, span head
          ${info.params.spanHead}, MLM head ${info.params.mlmHead.toLocaleString('en-US')})
        </dd>
        <dt>Shape</dt>
        <dd>
          ${c.numLayers} layers, hidden ${c.hiddenSize}, ${c.numHeads} heads, feed-forward ${c.intermediateSize},
          ${c.activation === 'gelu' ? 'exact GELU' : 'sigmoid GELU'}
        </dd>
        <dt>Vocabulary</dt>
        <dd>${info.vocabSize.toLocaleString('en-US')} tokens; windows up to ${c.maxPositions} tokens</dd>
        ${
          mem
            ? html`<dt>Memory (rough)</dt>
                <dd id="memory">
                  ${(mem.weights / MB).toFixed(1)} MB of weights; about ${((mem.training + mem.activations) / MB).toFixed(0)} MB while
                  training at batch ${this.settings!.batchSize} × ${this.settings!.maxLength} tokens
                </dd>`
            : ''
        }
        <dt>Time per epoch</dt>
        <dd id="epoch-time">
          ${
            t
              ? html`${formatDuration(t.epochMs)} (${t.updatesPerEpoch} updates over ${t.windows} windows; measured
                ${t.stepMs.map((m) => m.toFixed(0)).join(', ')} ms per update, the first includes warm-up)`
              : html`<button id="measure-speed" @click=${this._onMeasure} ?disabled=${this.timingBusy || this.split.train.length === 0}>
                    ${this.timingBusy ? 'timing…' : 'Measure with the current settings'}
                  </button>
                  ${this.split.train.length === 0 ? html`<span class="muted">needs training questions</span>` : ''}`
          }
        </dd>
      </dl>
      ${
        info.notices.length > 0
          ? html`<ul>
              ${info.notices.map((n) => html`<li class="muted">${n}</li>`)}
            </ul>`
          : ''
      }
    </section>`;
  }

  private emitBase(base: StoredBase): void {
    this.timing = null;
    this.dispatchEvent(new CustomEvent('base-change', { detail: { base }, bubbles: true, composed: true }));
  }

  private async _onShipped(): Promise<void> {
    this.message = '';
    try {
      const get = async (name: string) => {
        const r = await fetch(`base/${name}`);
        if (!r.ok) throw new Error(`base/${name}: the server answered ${r.status}`);
        return r;
      };
      const vocabFile = this.shipped?.includes('base/vocab.txt') ? 'vocab.txt' : 'tokenizer.json';
      const [config, weights, vocab] = await Promise.all([get('config.json'), get('model.safetensors'), get(vocabFile)]);
      const files: ModelFiles = {
        configJson: await config.text(),
        safetensors: new Uint8Array(await weights.arrayBuffer()),
        vocab: { file: vocabFile, text: await vocab.text() },
      };
      this.emitBase({ name: 'shipped base reader (tiny-models/base)', files });
    } catch (err) {
      this.message = (err as Error).message;
    }
  }

  private async takeFiles(list: File[]): Promise<void> {
    this.message = '';
    const byName = new Map(list.map((f) => [f.name, f]));
    const config = byName.get('config.json');
    const weights = byName.get('model.safetensors');
    const vocab = byName.get('vocab.txt') ?? byName.get('tokenizer.json');
    const lacking = [!config && 'config.json', !weights && 'model.safetensors', !vocab && 'vocab.txt or tokenizer.json'].filter(Boolean);
    if (lacking.length > 0 || !config || !weights || !vocab) {
      this.message = `The folder lacks ${lacking.join(', ')} (got ${list.map((f) => f.name).join(', ') || 'no files'}).`;
      return;
    }
    const folder = (list[0] as File & { webkitRelativePath?: string }).webkitRelativePath?.split('/')[0] || 'imported checkpoint';
    this.emitBase({
      name: folder,
      files: {
        configJson: await config.text(),
        safetensors: new Uint8Array(await weights.arrayBuffer()),
        vocab: { file: vocab.name as 'vocab.txt' | 'tokenizer.json', text: await vocab.text() },
      },
    });
  }

  private async _onPick(e: Event): Promise<void> {
    const input = e.target as HTMLInputElement;
    await this.takeFiles([...(input.files ?? [])]);
    input.value = '';
  }

  private _onDragOver(e: DragEvent): void {
    e.preventDefault();
    this.dragging = true;
  }

  private async _onDrop(e: DragEvent): Promise<void> {
    e.preventDefault();
    this.dragging = false;
    await this.takeFiles([...(e.dataTransfer?.files ?? [])]);
  }

  private async _onMeasure(): Promise<void> {
    if (!this.engine || !this.settings) return;
    this.timingBusy = true;
    this.message = '';
    try {
      this.timing = await this.engine.call({ kind: 'time-steps', train: this.split.train, config: this.settings, steps: 3 });
    } catch (err) {
      this.message = (err as Error).message;
    } finally {
      this.timingBusy = false;
    }
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'reader-screen': ReaderScreen;
  }
}
