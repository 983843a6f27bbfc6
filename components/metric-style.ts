// defines: METRIC_STYLE, metricSeries — one look per metric across every chart of the
// workbench (training charts, learning curve): the same colour for a metric wherever it
// is drawn, and for EM and F1 two line patterns and marker shapes, so both stay visible
// when their values coincide (F1 dashed with hollow rings, EM solid with dots inside).
import type uPlot from 'uplot';

export type MetricKey = 'loss' | 'em' | 'f1' | 'lr' | 'tokensPerSecond';

export interface MetricStyle {
  /** the series' name in the legend */
  label: string;
  stroke: string;
  /** line pattern: [dash, gap] in pixels; solid when absent */
  dash?: number[];
  /** marker: diameter in pixels and whether it is hollow */
  marker: { size: number; hollow: boolean };
  /** a value as the legend shows it under the cursor */
  format: (v: number) => string;
}

export const METRIC_STYLE: Readonly<Record<MetricKey, MetricStyle>> = {
  loss: { label: 'loss', stroke: '#1f5f8b', marker: { size: 4, hollow: false }, format: (v) => v.toFixed(4) },
  em: { label: 'EM', stroke: '#8a5a00', marker: { size: 5, hollow: false }, format: (v) => `${v.toFixed(1)} %` },
  f1: { label: 'F1', stroke: '#2d6a3e', dash: [6, 4], marker: { size: 10, hollow: true }, format: (v) => `${v.toFixed(1)} %` },
  lr: { label: 'learning rate', stroke: '#6b3fa0', marker: { size: 4, hollow: false }, format: (v) => v.toExponential(2) },
  tokensPerSecond: {
    label: 'tokens/s',
    stroke: '#a3262a',
    marker: { size: 4, hollow: false },
    format: (v) => Math.round(v).toLocaleString('en-US'),
  },
};

/** A uPlot series for a metric in its one look; markers shown when there are few points (or always). */
export function metricSeries(key: MetricKey, points: number, alwaysMark = false): uPlot.Series {
  const m = METRIC_STYLE[key];
  return {
    label: m.label,
    stroke: m.stroke,
    width: 1.5,
    ...(m.dash ? { dash: m.dash } : {}),
    value: (_u, v) => (v === null || v === undefined ? '–' : m.format(v)),
    points: {
      show: alwaysMark || points < 40,
      size: m.marker.size,
      width: 1.5,
      stroke: m.stroke,
      fill: m.marker.hollow ? '#fff0' : m.stroke,
    },
  };
}
