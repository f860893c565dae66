/**
 * The debrief's charts: echarts rendered to SVG strings in Node (server-side rendering, no DOM),
 * each chart created with a fixed size, drawn once without animation and disposed. The SVG ids
 * and class names echarts makes from process-wide counters are renamed from the chart's own
 * index, so the same event gives the same bytes in any process and ids never clash in one page.
 *
 * Colours are the dashboard's palette (Okabe & Ito); text and lines that carry meaning use the
 * darker variants that reach WCAG 2.1 AA contrast on white (ingest/palette.ts).
 */
import * as echarts from 'echarts';
import { PALETTE } from '../palette.js';
import type { RunDetail } from '../service/view.js';

/** The chart colours, from the palette the dashboard uses too (ingest/palette.ts). */
export const CHART_COLORS = {
  ink: PALETTE.ink,
  muted: PALETTE.muted,
  grid: PALETTE.grid,
  sim: PALETTE.sim,
  simDark: PALETTE.simDark,
  band99: PALETTE.band99,
  band90: PALETTE.band90,
  band50: PALETTE.band50,
  simultaneous: PALETTE.simultaneous,
  live: PALETTE.live,
  liveText: PALETTE.lowText,
  judged: PALETTE.judged,
  threshold: PALETTE.simultaneous,
} as const;

type Option = Record<string, unknown>;

/** One chart: a title for its <figure>, the SVG, and a text equivalent. */
export interface Chart {
  readonly svg: string;
  readonly description: string;
}

/** Render one option to an SVG string with ids renamed from `key` (see the module comment). */
export function renderSvg(option: Option, width: number, height: number, key: string): string {
  const chart = echarts.init(null, null, { renderer: 'svg', ssr: true, width, height });
  try {
    chart.setOption({ animation: false, textStyle: { fontFamily: 'sans-serif', color: CHART_COLORS.ink }, ...option });
    return renameIds(chart.renderToSVGString(), key);
  } finally {
    chart.dispose();
  }
}

function renameIds(svg: string, key: string): string {
  const names = new Map<string, string>();
  return svg
    .replace(/zr\d+-[A-Za-z]+-?\d+/g, (m) => {
      let n = names.get(m);
      if (n === undefined) {
        n = `${key}-${names.size}`;
        names.set(m, n);
      }
      return n;
    })
    .replace(/ ecmeta_[a-z_]+="[^"]*"/g, '')
    .replace(/<svg /, `<svg role="img" focusable="false" `);
}

const axis = (name: string, extra: Option = {}): Option => ({
  type: 'value',
  name,
  nameLocation: 'middle',
  axisLabel: { color: CHART_COLORS.muted, fontSize: 11 },
  nameTextStyle: { color: CHART_COLORS.ink, fontSize: 11 },
  axisLine: { lineStyle: { color: CHART_COLORS.muted } },
  splitLine: { lineStyle: { color: CHART_COLORS.grid } },
  ...extra,
});

/** Round a number for a chart (keeps the SVG short; the tables hold the exact figures). */
const r4 = (x: number): number => Math.round(x * 1e4) / 1e4;

/**
 * One channel of a run against its vignette's simulation: pointwise 50/90/99 % bands, the
 * simultaneous band (dashed), the simulated mean, the live samples (dots), the live smoothed track
 * on the judged window, and the judged window shaded on the time axis.
 */
export function envelopeChart(detail: RunDetail, channel: number, horizon: number, judged: ReadonlyArray<readonly [number, number]>, key: string): Chart | undefined {
  const grid = detail.grid;
  const env = detail.envelope?.[channel];
  if (!grid || !env) return undefined;
  const { name, unit } = detail.channels[channel];
  const zip = (ys: readonly number[] | undefined, keep?: (i: number) => boolean) => (ys ? grid.map((t, i) => [r4(t), keep && !keep(i) ? null : r4(ys[i])]) : []);
  const series: Option[] = [];
  const line = (nameText: string, data: unknown[], style: Option, extra: Option = {}): Option => ({ type: 'line', name: nameText, data, symbol: 'none', connectNulls: false, lineStyle: style, silent: true, ...extra });
  const levels = [
    { level: 0.99, color: CHART_COLORS.band99 },
    { level: 0.9, color: CHART_COLORS.band90 },
    { level: 0.5, color: CHART_COLORS.band50 },
  ];
  for (const { level, color } of levels) {
    const band = env.bands.find((b) => Math.abs(b.level - level) < 1e-9);
    if (!band) continue;
    const pct = Math.round(level * 100);
    series.push(line('', zip(band.lower), { opacity: 0 }, { stack: `b${pct}` }));
    series.push(line(`pointwise ${pct} % band`, grid.map((t, i) => [r4(t), r4(band.upper[i] - band.lower[i])]), { opacity: 0 }, { stack: `b${pct}`, areaStyle: { color, opacity: 1 }, itemStyle: { color } }));
  }
  const s = env.simultaneous;
  series.push(line(`simultaneous ${Math.round(s.level * 100)} % band`, [...zip(s.lower), [r4(grid[grid.length - 1]), null], ...zip(s.upper)], { color: CHART_COLORS.simultaneous, width: 1.1, type: [5, 3] }, { itemStyle: { color: CHART_COLORS.simultaneous } }));
  series.push(line('simulated mean', zip(env.mean), { color: CHART_COLORS.simDark, width: 1.3 }, { itemStyle: { color: CHART_COLORS.simDark } }));
  // Live samples as one thin polyline (one SVG path, where dots would be one element each).
  const raw = detail.raw.t.map((t, i) => [r4(t), r4(detail.raw.values[channel][i])]);
  series.push(line('live samples', raw, { color: CHART_COLORS.ink, width: 0.6, opacity: 0.6 }, { itemStyle: { color: CHART_COLORS.ink } }));
  const mask = detail.judged;
  series.push(
    line('live track (smoothed, judged window)', zip(detail.smoothed?.[channel], (i) => mask?.[i] === true), { color: CHART_COLORS.live, width: 2.4 }, {
      itemStyle: { color: CHART_COLORS.live },
      markArea: { silent: true, itemStyle: { color: CHART_COLORS.judged, opacity: 0.55 }, data: judged.map(([a, b]) => [{ xAxis: r4(a) }, { xAxis: r4(b) }]) },
    }),
  );
  const option: Option = {
    grid: { left: 62, right: 14, top: 52, bottom: 40 },
    legend: { top: 0, left: 0, itemWidth: 14, itemHeight: 8, itemGap: 8, textStyle: { fontSize: 10, color: CHART_COLORS.ink }, data: series.map((x) => x.name).filter((x) => x !== '') },
    xAxis: axis('track time (s)', { min: 0, max: horizon, nameGap: 24 }),
    yAxis: axis(`${name} (${unit})`, { scale: true, nameGap: 46 }),
    series,
  };
  return {
    svg: renderSvg(option, 720, 280, key),
    description: `${name} (${unit}) against track time: the simulated pointwise 50, 90 and 99 % bands, the simultaneous band and mean, the live samples (thin line) and the live smoothed track on the judged window (shaded)`,
  };
}

/** The run's path through the first two principal component scores, among the simulated runs. */
export function scoreChart(detail: RunDetail, key: string): Chart | undefined {
  const sc = detail.scores;
  if (!sc || sc.sims[0].length === 0) return undefined;
  const sims = sc.sims[0].map((x, i) => [r4(x), r4(sc.sims[1][i])]);
  const trail = sc.trail.map(([, x, y]) => [r4(x), r4(y)]);
  const last = trail[trail.length - 1];
  const option: Option = {
    grid: { left: 56, right: 14, top: 30, bottom: 40 },
    legend: { top: 0, left: 0, itemWidth: 12, itemHeight: 8, textStyle: { fontSize: 10, color: CHART_COLORS.ink } },
    xAxis: axis('score on component 1', { scale: true, nameGap: 24 }),
    yAxis: axis('score on component 2', { scale: true, nameGap: 38 }),
    series: [
      { type: 'scatter', name: 'simulated runs', data: sims, symbolSize: 4, itemStyle: { color: CHART_COLORS.sim, opacity: 0.45 }, silent: true },
      { type: 'line', name: 'the run as it flew', data: trail, symbol: 'circle', symbolSize: 3, lineStyle: { color: CHART_COLORS.live, width: 1.2 }, itemStyle: { color: CHART_COLORS.live }, silent: true },
      ...(last ? [{ type: 'scatter', name: 'final', data: [last], symbol: 'diamond', symbolSize: 11, itemStyle: { color: CHART_COLORS.live, borderColor: CHART_COLORS.ink, borderWidth: 1 }, silent: true }] : []),
    ],
  };
  return { svg: renderSvg(option, 340, 260, key), description: 'scores of the simulated runs on the first two principal components, and the run\'s path as it flew (the diamond is its final position)' };
}

/** Equal-width histogram of the simulated runs' statistic with the run's value marked. */
export function histogramChart(values: readonly number[], live: number, label: string, key: string): Chart | undefined {
  if (values.length === 0) return undefined;
  const lo = Math.min(...values, live);
  const hi = Math.max(...values, live);
  const bins = 20;
  const width = hi > lo ? (hi - lo) / bins : 1;
  const counts = new Array<number>(bins).fill(0);
  for (const v of values) counts[Math.min(bins - 1, Math.floor((v - lo) / width))]++;
  const option: Option = {
    grid: { left: 40, right: 12, top: 24, bottom: 40 },
    title: { text: label, left: 'center', top: 0, textStyle: { fontSize: 11, fontWeight: 'bold', color: CHART_COLORS.ink } },
    xAxis: axis(`${label} statistic`, {
      min: r4(lo),
      max: r4(lo + bins * width),
      nameGap: 24,
      axisLabel: { color: CHART_COLORS.muted, fontSize: 10, hideOverlap: true, showMinLabel: false, showMaxLabel: false, formatter: (v: number) => String(Number(v.toPrecision(3))) },
    }),
    yAxis: axis('runs', { nameGap: 26, minInterval: 1 }),
    series: [
      {
        type: 'bar',
        name: 'simulated runs',
        barWidth: '96%',
        data: counts.map((c, i) => [r4(lo + (i + 0.5) * width), c]),
        itemStyle: { color: CHART_COLORS.band50 },
        silent: true,
        markLine: {
          silent: true,
          symbol: 'none',
          lineStyle: { color: CHART_COLORS.live, width: 2, type: 'solid' },
          label: { formatter: 'this run', color: CHART_COLORS.liveText, fontSize: 10 },
          data: [{ xAxis: r4(live) }],
        },
      },
    ],
  };
  return { svg: renderSvg(option, 230, 180, key), description: `histogram of the ${label} statistic of the simulated runs (${values.length}), with this run's value marked` };
}

/** The event's anytime-valid evidence after each completed run, on a log scale, with its threshold. */
export function evidenceChart(martingale: readonly number[], threshold: number, key: string): Chart | undefined {
  if (martingale.length === 0) return undefined;
  const data = martingale.map((m, i) => [i + 1, r4(Math.max(m, 1e-3))]);
  // The axis reaches a power of ten above both the threshold and the evidence, so the threshold shows.
  const top = 10 ** Math.ceil(Math.log10(Math.max(threshold, ...martingale) * 1.01));
  const bottom = 10 ** Math.floor(Math.log10(Math.min(1, ...martingale.map((m) => Math.max(m, 1e-3)))));
  const option: Option = {
    grid: { left: 54, right: 16, top: 26, bottom: 40 },
    legend: { top: 0, left: 0, itemWidth: 14, itemHeight: 8, textStyle: { fontSize: 10, color: CHART_COLORS.ink } },
    xAxis: axis('completed runs', { min: 0, max: martingale.length, minInterval: 1, nameGap: 24 }),
    yAxis: axis('evidence (log scale)', { type: 'log', min: bottom, max: top, nameGap: 36 }),
    series: [
      {
        type: 'line',
        name: 'anytime-valid evidence',
        data,
        symbol: 'circle',
        symbolSize: 4,
        lineStyle: { color: CHART_COLORS.sim, width: 2 },
        itemStyle: { color: CHART_COLORS.sim },
        silent: true,
        markLine: {
          silent: true,
          symbol: 'none',
          lineStyle: { color: CHART_COLORS.threshold, type: [6, 3], width: 1.4 },
          label: { formatter: `threshold ${threshold}`, color: CHART_COLORS.threshold, fontSize: 10, position: 'insideEndTop' },
          data: [{ yAxis: threshold }],
        },
      },
    ],
  };
  return { svg: renderSvg(option, 440, 190, key), description: `the event's anytime-valid evidence after each completed run (log scale) against its threshold ${threshold}` };
}
