import { LitElement, css, html, type PropertyValues } from 'lit';
import { ChartController, type ChartOption, type SeriesOption } from './chart-controller.js';
import { formatClock, formatP, formatValue, plain } from './format.js';
import { COLORS, shared } from './theme.js';
import type { TableCell } from './data-table.js';
import './data-table.js';

export interface EvidencePoint {
  /** Completed runs so far. */
  readonly x: number;
  readonly y: number;
  /** What the point is about, e.g. the run that completed ("S1-L2/live-1"). */
  readonly label: string;
  /** Server clock, ms. */
  readonly at?: number;
}

/**
 * One line of evidence over the event. `scale: 'p'` draws on the left axis (p-value, log scale, with
 * the line at α); `scale: 'evidence'` draws on a right axis (evidence against the simulation, e.g. an
 * e-value, log scale, with the line at 1/α) that appears only when such a series is given.
 */
export interface EvidenceSeries {
  readonly id: string;
  readonly name: string;
  /** When the series is valid, said under the chart (e.g. "fixed-sample: ..."). */
  readonly note: string;
  readonly scale: 'p' | 'evidence';
  readonly points: readonly EvidencePoint[];
  readonly color?: string;
  readonly dashed?: boolean;
  /** A secondary line (e.g. one statistic's share of the headline). */
  readonly thin?: boolean;
  readonly symbol?: 'circle' | 'triangle' | 'rect' | 'diamond';
}

/**
 * Evidence timeline: combined evidence after each completed run, one line per series (the plan's
 * fixed-sample combination now; sequential evidence can be added as another series), with the
 * decision line at α.
 *
 * Slots: none. Parts: none. Events: none.
 */
export class PlEvidenceTimeline extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .chart {
        width: 100%;
        height: var(--pl-chart-height, 270px);
      }
      ul {
        margin: 4px 0 0;
        padding-left: 18px;
      }
      li {
        color: var(--pl-muted);
        font-size: 11.5px;
      }
    `,
  ];

  static override properties = {
    series: { attribute: false },
    alpha: { type: Number },
  };

  declare series: readonly EvidenceSeries[];
  declare alpha: number;

  private readonly chart = new ChartController(this, {
    container: () => this.renderRoot.querySelector<HTMLElement>('.chart'),
    base: () => this.baseOption(),
  });

  constructor() {
    super();
    this.series = [];
    this.alpha = 0.05;
  }

  override render() {
    return html`<div class="chart" role="img" aria-label="combined evidence after each completed run; the numbers are in the table below"></div>
      <ul>
        ${this.series.map((s) => html`<li><strong>${s.name}</strong> — ${s.note}</li>`)}
        <li>Dotted line: α = ${this.alpha}; points below it say the live runs so far are distinguishable from the simulation (not by how much).</li>
      </ul>
      <pl-data-table
        .caption=${'combined evidence after each completed run'}
        .columns=${[{ label: 'series' }, { label: 'runs completed', unit: 'count' }, { label: 'value' }, { label: 'after run' }, { label: 'at (local time)' }]}
        .rows=${() => this.rows()}
      ></pl-data-table>`;
  }

  override updated(changed: PropertyValues<this>): void {
    if (changed.has('series')) {
      const prev = changed.get('series') as readonly EvidenceSeries[] | undefined;
      const scales = (list: readonly EvidenceSeries[] | undefined) => [...new Set((list ?? []).map((s) => s.scale))].sort().join();
      if (prev !== undefined && scales(prev) !== scales(this.series)) this.chart.configure();
    }
    if (changed.has('series') || changed.has('alpha')) this.chart.setSeries(this.chartSeries());
  }

  private hasEvidence(): boolean {
    return this.series.some((s) => s.scale === 'evidence');
  }

  private baseOption(): ChartOption {
    const axisStyle = { axisLabel: { color: COLORS.muted }, splitLine: { lineStyle: { color: '#eef0f3' } } };
    return {
      // The legend sits in its own band under the axis title (scrolling when it is long), so it
      // never covers the plot; the right margin holds the right axis's labels and its title.
      grid: { outerBoundsMode: 'none', left: 88, right: this.hasEvidence() ? 80 : 16, top: 12, bottom: 76 },
      aria: { enabled: true },
      legend: { type: 'scroll', bottom: 6, left: 8, right: 8, textStyle: { fontSize: 11, color: COLORS.muted }, itemWidth: 16, itemHeight: 8 },
      xAxis: { type: 'value', name: 'runs completed (count)', nameLocation: 'middle', nameGap: 22, min: 0, minInterval: 1, ...axisStyle },
      yAxis: [
        { type: 'log', name: 'combined p-value (log)', nameLocation: 'middle', nameGap: 60, max: 1, ...axisStyle },
        { type: 'log', name: 'evidence (e-value, log)', nameLocation: 'middle', nameGap: 44, show: this.hasEvidence(), ...axisStyle, splitLine: { show: false } },
      ],
      tooltip: { trigger: 'item', renderMode: 'richText', confine: true, formatter: (p: unknown) => this.tooltip(p) },
    };
  }

  private chartSeries(): SeriesOption[] {
    const palette = [COLORS.simDark, COLORS.live, COLORS.ok, COLORS.alpha];
    const maxX = Math.max(1, ...this.series.flatMap((s) => s.points.map((p) => p.x)));
    const out: SeriesOption[] = this.series.map((s, i) => ({
      id: `ev-${s.id}`,
      name: s.name,
      type: 'line',
      yAxisIndex: s.scale === 'p' ? 0 : 1,
      data: s.points.map((p) => ({ value: [p.x, p.y], label: { show: false }, name: p.label, at: p.at })),
      symbol: s.symbol ?? 'circle',
      symbolSize: 7,
      lineStyle: { color: s.color ?? palette[i % palette.length], width: s.thin ? 1.2 : 2, type: s.dashed ? [6, 3] : s.thin ? [2, 2] : 'solid' },
      itemStyle: { color: s.color ?? palette[i % palette.length] },
    }));
    // Decision lines as data, so the log axes always include them.
    out.push({
      id: 'alpha',
      name: `α = ${this.alpha}`,
      type: 'line',
      yAxisIndex: 0,
      data: [
        [0, this.alpha],
        [maxX, this.alpha],
      ],
      symbol: 'none',
      silent: true,
      lineStyle: { color: COLORS.alpha, width: 1.5, type: [2, 3] },
      itemStyle: { color: COLORS.alpha },
    });
    if (this.hasEvidence()) {
      out.push({
        id: 'alpha-e',
        name: `1/α = ${formatValue(1 / this.alpha)}`,
        type: 'line',
        yAxisIndex: 1,
        data: [
          [0, 1 / this.alpha],
          [maxX, 1 / this.alpha],
        ],
        symbol: 'none',
        silent: true,
        lineStyle: { color: COLORS.alpha, width: 1.5, type: [2, 6] },
        itemStyle: { color: COLORS.alpha },
      });
    }
    return out;
  }

  private tooltip(p: unknown): string {
    const item = p as { seriesName?: string; value?: [number, number]; name?: string; data?: { at?: number } };
    if (!item.value) return '';
    const at = item.data && typeof item.data === 'object' && item.data.at !== undefined ? ` at ${formatClock(item.data.at)}` : '';
    return plain(`${item.seriesName ?? ''}\nafter ${item.value[0]} runs (last: ${item.name ?? ''})${at}\nvalue ${formatP(item.value[1])}`);
  }

  private rows(): TableCell[][] {
    return this.series.flatMap((s) => s.points.map((p) => [s.name, p.x, p.y, p.label, p.at !== undefined ? formatClock(p.at) : null]));
  }
}

customElements.define('pl-evidence-timeline', PlEvidenceTimeline);

declare global {
  interface HTMLElementTagNameMap {
    'pl-evidence-timeline': PlEvidenceTimeline;
  }
}
