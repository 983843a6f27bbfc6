// <metric-chart> — one live line chart (uPlot) of training numbers against the update
// count: loss, validation EM/F1, learning rate or tokens per second, each in its one look
// (metric-style.ts). Both axes are labelled with their units; the legend under the chart
// shows the values at the update under the cursor. Reflects the number of points drawn
// in `data-points`, so tests can wait for them, and the axis labels in `data-axes`.
// No events out.
import { LitElement, css, html, unsafeCSS, type PropertyValues } from 'lit';
import { customElement, property } from 'lit/decorators.js';
import uPlot from 'uplot';
import uPlotStyles from 'uplot/dist/uPlot.min.css?inline';
import { metricSeries, type MetricKey } from './metric-style.js';

export interface ChartSeries {
  metric: MetricKey;
  values: number[];
}

const HEIGHT = 170;

@customElement('metric-chart')
export class MetricChart extends LitElement {
  static override styles = [
    unsafeCSS(uPlotStyles),
    css`
      :host {
        display: block;
        border: 1px solid var(--line, #ccc);
        border-radius: 6px;
        padding: 0.4rem;
        background: #fff;
        min-width: 0;
        overflow: hidden;
      }
      h4 {
        margin: 0 0 0.2rem;
        font-size: 0.95rem;
      }
      .empty {
        color: var(--muted, #666);
        font-size: 0.85rem;
      }
      .u-legend {
        font-size: 0.8rem;
      }
      .u-legend .u-marker {
        width: 0.9em;
        height: 0.9em;
      }
    `,
  ];

  /** the chart's title */
  @property() heading = '';
  /** the y axis's label, with its unit ("percent", "cross-entropy, nats") */
  @property() yLabel = '';
  /** x values (update numbers) shared by every series */
  @property({ attribute: false }) x: number[] = [];
  @property({ attribute: false }) series: ChartSeries[] = [];
  /** label the y axis in scientific notation (learning rates are small numbers) */
  @property({ type: Boolean }) scientific = false;

  private plot: uPlot | null = null;
  private resize: ResizeObserver | null = null;
  private marked = false;

  override render() {
    return html`<h4>${this.heading}</h4>
      <div id="plot"></div>
      ${this.x.length === 0 ? html`<div class="empty">no points yet</div>` : ''}`;
  }

  override updated(changed: PropertyValues<this>): void {
    this.setAttribute('data-points', String(this.x.length));
    const target = this.renderRoot.querySelector('#plot') as HTMLElement;
    const data: uPlot.AlignedData = [this.x, ...this.series.map((s) => s.values)];
    const marked = this.x.length < 40;
    const rebuild = !this.plot || (changed.has('series') && this.plot.series.length !== this.series.length + 1) || marked !== this.marked;
    if (!rebuild) {
      this.plot!.setData(data);
      return;
    }
    this.plot?.destroy();
    this.marked = marked;
    this.plot = new uPlot(
      {
        width: this.width(target),
        height: HEIGHT,
        legend: { show: true, live: true },
        cursor: { points: { size: 7 } },
        scales: { x: { time: false } },
        axes: [
          { label: 'optimizer update', size: 36, labelSize: 16 },
          {
            label: this.yLabel,
            labelSize: 16,
            ...(this.scientific
              ? { size: 64, values: (_u: uPlot, splits: number[]) => splits.map((v) => v.toExponential(1)) }
              : { size: 56 }),
          },
        ],
        series: [
          { label: 'update', value: (_u, v) => (v === null || v === undefined ? '–' : String(v)) },
          ...this.series.map((s) => metricSeries(s.metric, this.x.length)),
        ],
      },
      data,
      target,
    );
    // the axis labels are drawn on the canvas: their texts are reflected for tests and tools
    this.setAttribute('data-axes', this.plot.axes.map((a) => a.label ?? '').join(' | '));
    this.resize ??= new ResizeObserver(() => this.plot?.setSize({ width: this.width(target), height: HEIGHT }));
    this.resize.observe(target);
  }

  /** The plot's width: its box's, so a narrow screen gets a narrow chart (never wider than the page). */
  private width(target: HTMLElement): number {
    return Math.max(200, target.clientWidth || 320);
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this.resize?.disconnect();
    this.resize = null;
    this.plot?.destroy();
    this.plot = null;
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'metric-chart': MetricChart;
  }
}
