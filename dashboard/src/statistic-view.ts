import { LitElement, css, html, type PropertyValues } from 'lit';
import { ChartController, type ChartOption, type SeriesOption } from './chart-controller.js';
import { formatValue } from './format.js';
import type { RunDetail } from './model.js';
import { pValue, rankText } from './parts.js';
import { histogram, type Histogram } from './stats.js';
import { COLORS, shared } from './theme.js';
import './data-table.js';

type Statistic = 'l2' | 'score' | 'residual';

const STATS: ReadonlyArray<{ key: Statistic; title: string; axis: string; help: string }> = [
  { key: 'l2', title: 'Distance from the mean track', axis: 'L2 distance (scaled units)', help: 'how far the run is from the simulated mean, all channels, scaled' },
  { key: 'score', title: 'Score distance', axis: 'score distance (Mahalanobis)', help: 'Mahalanobis distance on the kept components' },
  { key: 'residual', title: 'Residual', axis: 'residual (scaled units)', help: 'what the kept components do not explain' },
];

/**
 * One statistic: a histogram of the simulated runs' values with the run's value marked.
 *
 * Slots: none. Parts: none. Events: none.
 */
export class PlHistogram extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .chart {
        width: 100%;
        height: var(--pl-hist-height, 128px);
      }
      .head {
        display: flex;
        justify-content: space-between;
        align-items: baseline;
        gap: 8px;
        flex-wrap: wrap;
      }
      h3 {
        margin: 0;
        font-size: 12.5px;
        font-weight: 650;
      }
      .val {
        font-size: 12px;
      }
    `,
  ];

  static override properties = {
    heading: { type: String },
    axis: { type: String },
    help: { type: String },
    values: { attribute: false },
    value: { type: Number },
    p: { type: Number },
    kind: { type: String },
    alpha: { type: Number },
    sims: { type: Number },
  };

  declare heading: string;
  /** The x axis name with its unit. */
  declare axis: string;
  declare help: string;
  /** The simulated runs' values (RunDetail.reference.*). */
  declare values: readonly number[] | undefined;
  /** The run's value and p-value (RunView.judgement). */
  declare value: number | undefined;
  declare p: number | undefined;
  declare kind: 'provisional' | 'final' | undefined;
  declare alpha: number;
  declare sims: number;

  private hist: Histogram = { edges: [], counts: [] };

  private readonly chart = new ChartController(this, {
    container: () => this.renderRoot.querySelector<HTMLElement>('.chart'),
    base: () => this.baseOption(),
  });

  constructor() {
    super();
    this.heading = '';
    this.axis = '';
    this.help = '';
    this.alpha = 0.05;
    this.sims = 0;
  }

  override willUpdate(changed: PropertyValues<this>): void {
    if (changed.has('values') || changed.has('value')) this.hist = histogram(this.values ?? [], this.value);
  }

  override render() {
    return html`<div class="head">
        <h3 title=${this.help}>${this.heading}</h3>
        <span class="val"
          >this run <span class="num">${formatValue(this.value)}</span> · p = ${pValue(this.p, this.kind, this.alpha, { count: this.p !== undefined ? rankText(this.p, this.sims) : undefined })}</span
        >
      </div>
      <div class="chart" role="img" aria-label=${`${this.heading}: histogram of ${this.values?.length ?? 0} simulated runs with this run marked`}></div>
      <pl-data-table
        .caption=${`${this.heading}: simulated runs per bin`}
        .columns=${[{ label: 'bin from' }, { label: 'bin to' }, { label: 'simulated runs', unit: 'count' }]}
        .rows=${() => this.hist.counts.map((n, i) => [this.hist.edges[i], this.hist.edges[i + 1], n])}
      ></pl-data-table>`;
  }

  override updated(changed: PropertyValues<this>): void {
    if (changed.has('values') || changed.has('value') || changed.has('kind')) this.chart.setSeries(this.series());
    if (changed.has('axis')) this.chart.configure();
  }

  private baseOption(): ChartOption {
    return {
      grid: { outerBoundsMode: 'none', left: 40, right: 30, top: 20, bottom: 34 },
      aria: { enabled: true },
      xAxis: { type: 'value', name: this.axis, nameLocation: 'middle', nameGap: 20, scale: true, splitNumber: 5, axisLabel: { color: COLORS.muted, fontSize: 10, hideOverlap: true }, splitLine: { show: false } },
      yAxis: { type: 'value', name: 'runs (count)', nameLocation: 'middle', nameGap: 26, minInterval: 1, axisLabel: { color: COLORS.muted, fontSize: 10 }, splitLine: { lineStyle: { color: '#eef0f3' } } },
    };
  }

  /** 'right' when the run's value is in the right half of the histogram's range, else 'left'. */
  private labelAlign(v: number): 'left' | 'right' {
    const { edges } = this.hist;
    if (edges.length < 2) return 'left';
    const lo = Math.min(edges[0], v);
    const hi = Math.max(edges[edges.length - 1], v);
    return v > (lo + hi) / 2 ? 'right' : 'left';
  }

  private series(): SeriesOption[] {
    const { edges, counts } = this.hist;
    // A step line over the bin edges: one polyline, whatever the number of simulated runs.
    const steps: Array<[number, number]> = counts.map((n, i) => [edges[i], n]);
    if (counts.length > 0) steps.push([edges[edges.length - 1], counts[counts.length - 1]]);
    const v = this.value;
    const final = this.kind === 'final';
    return [
      {
        id: 'hist',
        name: 'simulated runs',
        type: 'line',
        step: 'end',
        data: steps,
        symbol: 'none',
        silent: true,
        lineStyle: { color: COLORS.sim, width: 1 },
        areaStyle: { color: COLORS.band90, opacity: 1 },
      },
      {
        id: 'run',
        name: 'this run',
        type: 'line',
        data: [],
        silent: true,
        markLine:
          v === undefined
            ? { data: [] }
            : {
                silent: true,
                symbol: ['none', final ? 'diamond' : 'emptyDiamond'],
                symbolSize: 10,
                lineStyle: { color: COLORS.live, width: 2, type: final ? 'solid' : [4, 3] },
                // Anchored on the side of the line that faces the middle of the axis, so the text
                // stays inside the chart wherever the run falls.
                label: { formatter: final ? 'this run' : 'this run (provisional)', color: COLORS.live, fontSize: 10, position: 'end', distance: 2, align: this.labelAlign(v) },
                data: [{ xAxis: v }],
              },
      },
    ];
  }
}

/**
 * Statistic view: the three statistics of the selected run (l2, score, residual), each a histogram
 * of the simulated runs with the run's value and p-value.
 *
 * Slots: none. Parts: none. Events: none.
 */
export class PlStatisticView extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: grid;
        gap: 10px;
      }
    `,
  ];

  static override properties = {
    detail: { attribute: false },
    alpha: { type: Number },
  };

  declare detail: RunDetail | undefined;
  declare alpha: number;

  constructor() {
    super();
    this.alpha = 0.05;
  }

  override render() {
    const j = this.detail?.run.judgement;
    return STATS.map(
      (s) =>
        html`<pl-histogram
          .heading=${s.title}
          .axis=${s.axis}
          .help=${s.help}
          .values=${this.detail?.reference?.[s.key]}
          .value=${j?.statistics[s.key]}
          .p=${j?.pValues[s.key]}
          .kind=${j?.kind}
          .alpha=${this.alpha}
          .sims=${j?.simsUsed ?? 0}
        ></pl-histogram>`,
    );
  }
}

customElements.define('pl-histogram', PlHistogram);
customElements.define('pl-statistic-view', PlStatisticView);

declare global {
  interface HTMLElementTagNameMap {
    'pl-histogram': PlHistogram;
    'pl-statistic-view': PlStatisticView;
  }
}
