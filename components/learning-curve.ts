// <learning-curve> — how the validation score grows with the training data. On request
// the worker trains fresh copies of the base reader, with the current training settings,
// on 25%, 50% and 100% of the training questions (whole passages, nested: each smaller
// share lies inside the larger) and scores each on the validation questions; this element
// shows the progress (share, update k of n) with a cancel button, then a table and a
// uPlot chart of F1 and EM against the number of training questions. The runs are
// throwaway: nothing is kept in the checkpoint store, and leaving the screen cancels a
// curve in progress. Reflects its state in `data-status` and the points in `data-points`.
// No events out.
import { LitElement, css, html, unsafeCSS, type PropertyValues } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import uPlot from 'uplot';
import uPlotStyles from 'uplot/dist/uPlot.min.css?inline';
import type { QARecord } from '../src/data/record.js';
import type { TrainConfig } from '../src/train/config.js';
import type { BaseInfo, CurveEvent, CurvePoint, LearningCurve as CurveResult } from '../workers/protocol.js';
import type { EngineClient } from './engine-client.js';
import { screenStyles } from './shared-styles.js';
import { metricSeries } from './metric-style.js';

/** The shares of the training questions, smallest first. */
const SHARES: readonly number[] = [0.25, 0.5, 1];

/** Where a curve stands. */
type CurveStatus =
  /** none asked for yet on this screen */
  | { status: 'idle' }
  /** the worker trains and scores; `progress` says where it is */
  | { status: 'running'; curveId: string; progress: string; cancelling: boolean }
  /** every share was scored, or the curve was cancelled with `points` done before */
  | { status: 'done'; result: CurveResult }
  | { status: 'failed'; error: string };

const pct = (v: number | null) => (v === null ? '–' : v.toFixed(2));
const shareLabel = (share: number) => `${Math.round(100 * share)}%`;

@customElement('learning-curve')
export class LearningCurve extends LitElement {
  static override styles = [
    screenStyles,
    unsafeCSS(uPlotStyles),
    css`
      #curve-plot {
        margin-top: 0.6rem;
      }
    `,
  ];

  @property({ attribute: false }) engine: EngineClient | null = null;
  @property({ attribute: false }) baseInfo: BaseInfo | null = null;
  /** the training questions of the current split (the 100% share) */
  @property({ attribute: false }) train: QARecord[] = [];
  /** the validation questions each share's reader is scored on */
  @property({ attribute: false }) validation: QARecord[] = [];
  /** the current training settings; every share is trained with them */
  @property({ attribute: false }) settings: TrainConfig | null = null;

  @state() private curve: CurveStatus = { status: 'idle' };
  /** the points scored so far, smallest share first */
  @state() private points: CurvePoint[] = [];

  private plot: uPlot | null = null;
  private resize: ResizeObserver | null = null;
  private stopListening: (() => void) | null = null;
  /** the share being trained, for the progress line */
  private current = '';

  override render() {
    const c = this.curve;
    const running = c.status === 'running';
    const can =
      this.engine !== null &&
      this.baseInfo !== null &&
      this.settings !== null &&
      this.train.length > 0 &&
      this.validation.length > 0 &&
      !running;
    return html`<section>
      <h3>Learning curve</h3>
      <p class="muted">
        Trains fresh copies of the base reader with the current training settings on ${SHARES.map(shareLabel).join(', ')} of the
        ${this.train.length} training questions (whole passages; each smaller share lies inside the larger) and scores each on the
        validation questions. Nothing is kept as a checkpoint; leaving this screen cancels it.
      </p>
      <div class="row">
        <button id="curve-start" @click=${this._onStart} ?disabled=${!can}>Draw the learning curve</button>
        ${
          c.status === 'running'
            ? html`<button id="curve-cancel" @click=${this._onCancel} ?disabled=${c.cancelling}>
                  ${c.cancelling ? 'cancelling…' : 'Cancel'}
                </button>
                <span class="muted" id="curve-progress" aria-live="polite">${c.progress}</span>`
            : ''
        }
        ${c.status === 'done' && c.result.status === 'cancelled' ? html`<span class="muted" id="curve-cancelled">cancelled after ${this.points.length} of ${SHARES.length} shares</span>` : ''}
      </div>
      ${c.status === 'failed' ? html`<p class="note bad" role="alert">${c.error}</p>` : ''}
      ${this.points.length > 0 ? this.renderTable() : ''}
      <div id="curve-plot"></div>
    </section>`;
  }

  private renderTable() {
    return html`<table id="curve-table">
      <thead>
        <tr>
          <th>Share</th>
          <th class="num">Training questions</th>
          <th class="num">Passages</th>
          <th class="num">Updates</th>
          <th class="num">EM</th>
          <th class="num">F1</th>
        </tr>
      </thead>
      <tbody>
        ${this.points.map(
          (p) =>
            html`<tr data-share=${p.share} data-questions=${p.questions} data-f1=${p.f1 === null ? '' : String(p.f1)}>
              <td>${shareLabel(p.share)}</td>
              <td class="num">${p.questions}</td>
              <td class="num">${p.passages}</td>
              <td class="num">${p.updates}</td>
              <td class="num">${pct(p.em)}</td>
              <td class="num">${pct(p.f1)}</td>
            </tr>`,
        )}
      </tbody>
    </table>`;
  }

  override updated(changed: PropertyValues): void {
    this.setAttribute('data-status', this.curve.status);
    this.setAttribute('data-points', String(this.points.length));
    if (changed.has('points')) this.drawChart();
  }

  /** F1 and EM against training questions; built on the first point, redrawn after. */
  private drawChart(): void {
    const target = this.renderRoot.querySelector('#curve-plot') as HTMLElement | null;
    if (!target) return;
    if (this.points.length === 0) {
      this.plot?.destroy();
      this.plot = null;
      return;
    }
    // uPlot reads missing values as gaps
    const data: uPlot.AlignedData = [this.points.map((p) => p.questions), this.points.map((p) => p.f1), this.points.map((p) => p.em)];
    if (this.plot) {
      this.plot.setData(data);
      return;
    }
    this.plot = new uPlot(
      {
        width: Math.max(240, target.clientWidth || 320),
        height: 200,
        // the legend shows the values at the point under the cursor
        legend: { live: true },
        scales: { x: { time: false } },
        axes: [
          { label: 'training questions', size: 40 },
          { label: 'percent', size: 56 },
        ],
        series: [
          { label: 'training questions' },
          metricSeries('f1', this.points.length, true),
          metricSeries('em', this.points.length, true),
        ],
      },
      data,
      target,
    );
    this.resize ??= new ResizeObserver(() => this.plot?.setSize({ width: Math.max(240, target.clientWidth), height: 200 }));
    this.resize.observe(target);
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    // throwaway runs nobody is watching any more
    if (this.curve.status === 'running') void this.engine?.call({ kind: 'cancel-curve', curveId: this.curve.curveId });
    this.stopListening?.();
    this.stopListening = null;
    this.resize?.disconnect();
    this.resize = null;
    this.plot?.destroy();
    this.plot = null;
  }

  private async _onStart(): Promise<void> {
    const engine = this.engine;
    const settings = this.settings;
    if (!engine || !settings) return;
    const curveId = `curve-${Date.now().toString(36)}`;
    this.points = [];
    this.current = '';
    this.curve = { status: 'running', curveId, progress: 'starting…', cancelling: false };
    this.stopListening?.();
    this.stopListening = engine.onCurveEvent((id, event) => {
      if (id === curveId) this._onCurveEvent(event);
    });
    try {
      const result = await engine.call({
        kind: 'learning-curve',
        curveId,
        train: this.train,
        validation: this.validation,
        config: { ...settings },
        shares: [...SHARES],
        seed: settings.seed,
      });
      this.points = result.points;
      this.curve = { status: 'done', result };
    } catch (err) {
      this.curve = { status: 'failed', error: (err as Error).message };
    } finally {
      this.stopListening?.();
      this.stopListening = null;
    }
  }

  private _onCurveEvent(event: CurveEvent): void {
    const c = this.curve;
    if (c.status !== 'running') return;
    const at = `share ${event.index + 1} of ${event.of}`;
    let progress = c.progress;
    if (event.type === 'share') {
      this.current = `${at} (${shareLabel(event.share)}: ${event.questions} questions from ${event.passages} passages)`;
      progress = `${this.current}: preparing windows…`;
    } else if (event.type === 'update') {
      progress = `${this.current || at}: update ${event.update} of ${event.totalUpdates}`;
    } else if (event.type === 'scoring') {
      progress = `${this.current || at}: scoring on the validation questions…`;
    } else {
      this.points = [...this.points, event.point];
    }
    this.curve = { ...c, progress };
  }

  private _onCancel(): void {
    const c = this.curve;
    if (c.status !== 'running' || !this.engine) return;
    this.curve = { ...c, cancelling: true };
    void this.engine.call({ kind: 'cancel-curve', curveId: c.curveId });
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'learning-curve': LearningCurve;
  }
}
