import { LitElement, css, html, type PropertyValues } from 'lit';
import { ChartController, type ChartOption, type SeriesOption } from './chart-controller.js';
import { formatValue, plain } from './format.js';
import type { RunDetail } from './model.js';
import { COLORS } from './theme.js';
import { shared } from './theme.js';
import type { TableCell } from './data-table.js';
import './data-table.js';

type Pair = [number, number | null];

const LEVELS = [
  { level: 0.99, color: COLORS.band99 },
  { level: 0.9, color: COLORS.band90 },
  { level: 0.5, color: COLORS.band50 },
] as const;

/** The series that follow the live run (the rest follow the vignette's baseline). */
const LIVE_SERIES: ReadonlySet<string> = new Set(['proj-lo', 'proj-band', 'proj-mean', 'raw', 'smooth', 'now']);

/** Charts of one run share their time zoom. */
export const RUN_ZOOM_GROUP = 'plumbline-run-detail';

/**
 * One channel of the selected run against its vignette's simulation: pointwise 50/90/99 % bands
 * (shaded), the simultaneous band (outlined), the mean track, a few simulated runs (faint), the
 * live samples (dots), the live smoothed track over the judged window (thick line), the projected
 * remainder with its band (while in flight, dashed) and a now-cursor. Time zoom and pan (wheel,
 * drag, slider) are kept across data updates and shared by the channels of a run.
 *
 * Slots: none. Parts: none. Events: none.
 */
export class PlChannelChart extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .chart {
        width: 100%;
        height: var(--pl-chart-height, 250px);
      }
    `,
  ];

  static override properties = {
    detail: { attribute: false },
    channel: { type: Number },
    name: { type: String },
    unit: { type: String },
    horizon: { type: Number },
  };

  /** The run's detail from /api/runs (its channels, samples, envelope, projection). */
  declare detail: RunDetail | undefined;
  /** Channel index into detail.channels. */
  declare channel: number;
  /** The channel's name and unit (from the plan). */
  declare name: string;
  declare unit: string;
  declare horizon: number;

  private readonly chart = new ChartController(this, {
    container: () => this.renderRoot.querySelector<HTMLElement>('.chart'),
    base: () => this.baseOption(),
    onInit: (c) => {
      c.group = RUN_ZOOM_GROUP;
    },
  });

  constructor() {
    super();
    this.channel = 0;
    this.name = '';
    this.unit = '';
    this.horizon = 360;
  }

  override render() {
    const name = `${this.name} (${this.unit})`;
    return html`<div class="chart" role="img" aria-label=${`${name} against track time: simulated bands and the live run; the numbers are in the table below`}></div>
      <pl-data-table
        .summary=${'Show the numbers (bands, mean, live, projection)'}
        .caption=${`${name} on the analysis grid: simulated bands and mean, live smoothed track, projection`}
        .columns=${this.gridColumns(this.unit)}
        .rows=${() => this.gridRows()}
      ></pl-data-table>
      <pl-data-table .summary=${'Show the live samples'} .caption=${`${name}: live samples as received`} .columns=${[{ label: 'track time', unit: 's' }, { label: this.name, unit: this.unit }]} .rows=${() => this.rawRows()}></pl-data-table>`;
  }

  override updated(changed: PropertyValues<this>): void {
    if (this.hasUpdated && (changed.has('name') || changed.has('unit') || changed.has('horizon')) && changed.size > 0) this.chart.configure();
    // The now-cursor moves with the detail (at most twice a second): redrawing a chart at the
    // socket's update rate only to move one line would cost more than everything else together.
    // The simulated side (bands, mean, texture) changes only with a refit: when it kept its
    // identity (see share.ts) only the live series are sent.
    if (!changed.has('detail') && !changed.has('channel')) return;
    const prev = changed.get('detail') as RunDetail | undefined;
    const d = this.detail;
    const simulatedSame = !changed.has('channel') && prev !== undefined && d !== undefined && prev.grid === d.grid && prev.envelope === d.envelope && prev.texture === d.texture;
    this.chart.setSeries(this.series(), simulatedSame ? LIVE_SERIES : undefined);
  }

  private baseOption(): ChartOption {
    return {
      grid: { outerBoundsMode: 'none', left: 64, right: 18, top: 22, bottom: 52 },
      aria: { enabled: true },
      xAxis: {
        type: 'value',
        name: 'track time (s)',
        nameLocation: 'middle',
        nameGap: 22,
        min: 0,
        max: this.horizon,
        axisLabel: { color: COLORS.muted },
        splitLine: { lineStyle: { color: '#eef0f3' } },
      },
      yAxis: {
        type: 'value',
        name: `${this.name} (${this.unit})`,
        nameLocation: 'middle',
        nameGap: 48,
        scale: true,
        axisLabel: { color: COLORS.muted },
        splitLine: { lineStyle: { color: '#eef0f3' } },
      },
      dataZoom: [
        { type: 'inside', xAxisIndex: 0, filterMode: 'none' },
        { type: 'slider', xAxisIndex: 0, filterMode: 'none', height: 12, bottom: 4, showDetail: false, showDataShadow: false, brushSelect: false },
      ],
      tooltip: { trigger: 'axis', renderMode: 'richText', confine: true, formatter: (p: unknown) => this.tooltip(p) },
    };
  }

  private series(): SeriesOption[] {
    const d = this.detail;
    const c = this.channel;
    const grid = d?.grid ?? [];
    const env = d?.envelope?.[c];
    const line = (id: string, name: string, data: Pair[], style: Record<string, unknown>, extra: Record<string, unknown> = {}): SeriesOption => ({
      id,
      name,
      type: 'line',
      data,
      symbol: 'none',
      showSymbol: false,
      connectNulls: false,
      lineStyle: style,
      emphasis: { disabled: true },
      ...extra,
    });
    const zip = (ys: readonly number[] | undefined, keep?: (i: number) => boolean): Pair[] => (ys ? grid.map((t, i) => [t, keep && !keep(i) ? null : ys[i]]) : []);
    const out: SeriesOption[] = [];
    // The few simulated runs as one polyline broken by gaps (one series, not one per run).
    const texture: Pair[] = [];
    for (const run of d?.texture ?? []) {
      if (texture.length > 0) texture.push([grid[grid.length - 1], null]);
      texture.push(...zip(run[c]));
    }
    out.push(line('texture', 'simulated runs', texture, { color: COLORS.texture, width: 0.7, opacity: 0.6 }, { silent: true, z: 1 }));
    for (const { level, color } of LEVELS) {
      const band = env?.bands.find((b) => Math.abs(b.level - level) < 1e-9);
      const pct = Math.round(level * 100);
      out.push(line(`band-${pct}-lo`, '', zip(band?.lower), { opacity: 0 }, { stack: `band-${pct}`, silent: true, z: 0 }));
      out.push(
        line(
          `band-${pct}`,
          `pointwise ${pct} %`,
          band ? grid.map((t, i) => [t, band.upper[i] - band.lower[i]]) : [],
          { opacity: 0 },
          { stack: `band-${pct}`, areaStyle: { color, opacity: 1 }, itemStyle: { color }, silent: true, z: 0 },
        ),
      );
    }
    const sim = env?.simultaneous;
    const simStyle = { color: COLORS.simultaneous, width: 1.2, type: [5, 3] };
    const simul: Pair[] = sim ? [...zip(sim.lower), [grid[grid.length - 1], null], ...zip(sim.upper)] : [];
    out.push(line('simultaneous', 'simultaneous band', simul, simStyle, { itemStyle: { color: COLORS.simultaneous }, silent: true, z: 2 }));
    out.push(line('mean', 'simulated mean', zip(env?.mean), { color: COLORS.simDark, width: 1.4 }, { itemStyle: { color: COLORS.simDark }, z: 3 }));
    // Projection of the remainder (only sent while the run is in flight).
    const proj = d?.projection;
    const after = (i: number) => proj !== undefined && grid[i] >= proj.from;
    out.push(line('proj-lo', '', zip(proj?.lower[c], after), { opacity: 0 }, { stack: 'proj', silent: true, z: 2 }));
    out.push(
      line('proj-band', 'projection', proj ? grid.map((t, i) => [t, after(i) ? proj.upper[c][i] - proj.lower[c][i] : null]) : [], { opacity: 0 }, {
        stack: 'proj',
        areaStyle: { color: COLORS.projection, opacity: 0.22 },
        itemStyle: { color: COLORS.projection },
        silent: true,
        z: 2,
      }),
    );
    out.push(line('proj-mean', 'projection', zip(proj?.mean[c], after), { color: COLORS.projection, width: 2, type: [6, 4] }, { itemStyle: { color: COLORS.projection }, z: 4 }));
    // The live run.
    const raw: Array<[number, number]> = d ? d.raw.t.map((t, i) => [t, d.raw.values[c][i]]) : [];
    out.push({
      id: 'raw',
      name: 'live samples',
      type: 'scatter',
      data: raw,
      symbol: 'circle',
      symbolSize: 2.6,
      large: true,
      largeThreshold: 200,
      itemStyle: { color: COLORS.raw, opacity: 0.5 },
      silent: true,
      z: 5,
    });
    const judged = d?.judged;
    out.push(line('smooth', 'live smoothed', zip(d?.smoothed?.[c], (i) => judged?.[i] === true), { color: COLORS.live, width: 2.6 }, { itemStyle: { color: COLORS.live }, z: 6 }));
    out.push(this.cursor());
    return out;
  }

  private cursor(): SeriesOption {
    const run = this.detail?.run;
    const t = run?.status === 'in-flight' ? run.lastT : undefined;
    return {
      id: 'now',
      name: 'now',
      type: 'line',
      data: [],
      silent: true,
      markLine:
        t === undefined
          ? { data: [] }
          : {
              silent: true,
              symbol: 'none',
              animation: false,
              lineStyle: { color: COLORS.ink, width: 1, type: 'solid' },
              label: { formatter: `now ${t.toFixed(0)} s`, position: 'end', color: COLORS.ink, fontSize: 10, distance: 2 },
              data: [{ xAxis: t }],
            },
    };
  }

  private tooltip(params: unknown): string {
    const list = Array.isArray(params) ? (params as Array<{ axisValue?: number }>) : [params as { axisValue?: number }];
    const t = Number(list[0]?.axisValue);
    const d = this.detail;
    const grid = d?.grid;
    if (!d || !grid || grid.length === 0 || !Number.isFinite(t)) return '';
    let i = 0;
    for (let k = 1; k < grid.length; k++) if (Math.abs(grid[k] - t) < Math.abs(grid[i] - t)) i = k;
    const c = this.channel;
    const unit = plain(this.unit);
    const env = d.envelope?.[c];
    const b90 = env?.bands.find((b) => Math.abs(b.level - 0.9) < 1e-9);
    const lines = [`t = ${grid[i].toFixed(1)} s`];
    if (env) lines.push(`simulated mean ${formatValue(env.mean[i])} ${unit}`);
    if (b90) lines.push(`pointwise 90 %: ${formatValue(b90.lower[i])} to ${formatValue(b90.upper[i])} ${unit}`);
    if (env) lines.push(`simultaneous: ${formatValue(env.simultaneous.lower[i])} to ${formatValue(env.simultaneous.upper[i])} ${unit}`);
    if (d.smoothed && d.judged?.[i]) lines.push(`live smoothed ${formatValue(d.smoothed[c][i])} ${unit}`);
    if (d.projection && grid[i] >= d.projection.from) lines.push(`projected ${formatValue(d.projection.mean[c][i])} ${unit}`);
    return lines.join('\n');
  }

  private gridColumns(unit: string | undefined) {
    return [
      { label: 'track time', unit: 's' },
      { label: 'sim. mean', unit },
      { label: '50 % low', unit },
      { label: '50 % high', unit },
      { label: '90 % low', unit },
      { label: '90 % high', unit },
      { label: '99 % low', unit },
      { label: '99 % high', unit },
      { label: 'simult. low', unit },
      { label: 'simult. high', unit },
      { label: 'live smoothed', unit },
      { label: 'projected', unit },
      { label: 'proj. low', unit },
      { label: 'proj. high', unit },
    ];
  }

  private gridRows(): TableCell[][] {
    const d = this.detail;
    const c = this.channel;
    if (!d?.grid) return [];
    const env = d.envelope?.[c];
    const band = (level: number) => env?.bands.find((b) => Math.abs(b.level - level) < 1e-9);
    const [b50, b90, b99] = [band(0.5), band(0.9), band(0.99)];
    const p = d.projection;
    return d.grid.map((t, i) => {
      const projected = p !== undefined && t >= p.from;
      return [
        t,
        env?.mean[i],
        b50?.lower[i],
        b50?.upper[i],
        b90?.lower[i],
        b90?.upper[i],
        b99?.lower[i],
        b99?.upper[i],
        env?.simultaneous.lower[i],
        env?.simultaneous.upper[i],
        d.judged?.[i] ? d.smoothed?.[c][i] : null,
        projected ? p.mean[c][i] : null,
        projected ? p.lower[c][i] : null,
        projected ? p.upper[c][i] : null,
      ];
    });
  }

  private rawRows(): TableCell[][] {
    const d = this.detail;
    if (!d) return [];
    return d.raw.t.map((t, i) => [t, d.raw.values[this.channel][i]]);
  }
}

customElements.define('pl-channel-chart', PlChannelChart);

declare global {
  interface HTMLElementTagNameMap {
    'pl-channel-chart': PlChannelChart;
  }
}
