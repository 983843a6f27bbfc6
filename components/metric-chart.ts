// <metric-chart> — one live line chart (uPlot) of training numbers against the update
// count: loss, validation EM/F1, learning rate or tokens per second. Reflects the number
// of points drawn in `data-points`, so tests can wait for them. No events out.
import { LitElement, css, html, unsafeCSS, type PropertyValues } from 'lit';
import { customElement, property } from 'lit/decorators.js';
import uPlot from 'uplot';
import uPlotStyles from 'uplot/dist/uPlot.min.css?inline';

export interface ChartSeries {
  label: string;
  values: number[];
  /** a CSS colour */
  stroke: string;
}

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
      }
      h4 {
        margin: 0 0 0.2rem;
        font-size: 0.95rem;
      }
      .empty {
        color: var(--muted, #666);
        font-size: 0.85rem;
      }
    `,
  ];

  /** the chart's title */
  @property() heading = '';
  /** x values (update numbers) shared by every series */
  @property({ attribute: false }) x: number[] = [];
  @property({ attribute: false }) series: ChartSeries[] = [];
  /** label the y axis in scientific notation (learning rates are small numbers) */
  @property({ type: Boolean }) scientific = false;

  private plot: uPlot | null = null;
  private resize: ResizeObserver | null = null;

  override render() {
    return html`<h4>${this.heading}</h4>
      <div id="plot"></div>
      ${this.x.length === 0 ? html`<div class="empty">no points yet</div>` : ''}`;
  }

  override updated(changed: PropertyValues<this>): void {
    this.setAttribute('data-points', String(this.x.length));
    const target = this.renderRoot.querySelector('#plot') as HTMLElement;
    const data: uPlot.AlignedData = [this.x, ...this.series.map((s) => s.values)];
    if (!this.plot || (changed.has('series') && this.plot.series.length !== this.series.length + 1)) {
      this.plot?.destroy();
      const width = Math.max(240, target.clientWidth || 320);
      this.plot = new uPlot(
        {
          width,
          height: 170,
          legend: { show: this.series.length > 1 },
          scales: { x: { time: false } },
          axes: [
            { label: 'update', size: 36 },
            this.scientific ? { size: 64, values: (_u, splits) => splits.map((v) => v.toExponential(1)) } : { size: 56 },
          ],
          series: [
            { label: 'update' },
            ...this.series.map((s) => ({ label: s.label, stroke: s.stroke, width: 1.5, points: { show: this.x.length < 40 } })),
          ],
        },
        data,
        target,
      );
      this.resize ??= new ResizeObserver(() => this.plot?.setSize({ width: Math.max(240, target.clientWidth), height: 170 }));
      this.resize.observe(target);
    } else {
      this.plot.setData(data);
    }
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
