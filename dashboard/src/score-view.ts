import { LitElement, css, html, nothing, type PropertyValues } from 'lit';
import { ChartController, type ChartOption, type SeriesOption } from './chart-controller.js';
import { formatValue } from './format.js';
import type { RunDetail } from './model.js';
import { chiSquareUpper } from '../../engine/chisquare.js';
import { ellipse } from './stats.js';
import { COLORS, shared } from './theme.js';
import type { TableCell } from './data-table.js';
import './data-table.js';

/**
 * Score view: the simulated runs as a cloud on functional principal components 1 and 2 (from the
 * fit that judged the run), the run's trail as it progressed, and the threshold ellipse
 * x²/λ1 + y²/λ2 = χ²₂(1 − α) = −2 ln α. With one kept component the threshold is the pair of
 * lines |x| = √(λ1 χ²₁(1 − α)).
 *
 * Slots: none. Parts: none. Events: none.
 */
export class PlScoreView extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .chart {
        width: 100%;
        height: var(--pl-chart-height, 260px);
      }
    `,
  ];

  static override properties = {
    detail: { attribute: false },
    alpha: { type: Number },
  };

  declare detail: RunDetail | undefined;
  declare alpha: number;

  private shownTwoD = true;
  private readonly chart = new ChartController(this, {
    container: () => this.renderRoot.querySelector<HTMLElement>('.chart'),
    base: () => this.baseOption(),
  });

  constructor() {
    super();
    this.alpha = 0.05;
  }

  override render() {
    const s = this.detail?.scores;
    const k = this.detail?.run.judgement?.components;
    const r2 = chiSquareUpper(this.alpha, 2);
    return html`<div class="chart" role="img" aria-label="scores of the simulated runs and of this run on components 1 and 2; the numbers are in the table below"></div>
      ${s
        ? html`<p class="caption">
            ○ the ${s.sims[0].length} simulated runs; <span style="color:${COLORS.live}">◆</span> this run (◇ while provisional) and its trail, each point from the fit at
            that time. ${k === 1
              ? html`Threshold: |x| = √(λ₁ χ²₁(1 − α)), α = ${this.alpha}.`
              : html`Ellipse: x²/λ₁ + y²/λ₂ = −2 ln α = ${r2.toFixed(2)} (χ²₂ at 1 − α, α = ${this.alpha}).`}
            <strong>The score distance and its p-value use all ${k ?? 'the'} kept component${k === 1 ? '' : 's'}</strong>, ranked among the simulated runs; this picture
            shows ${k === 1 ? 'the one kept component (the threshold is a pair of lines; the vertical spread is only for visibility)' : 'the first two'}.
          </p>`
        : html`<p class="caption">No scores yet: the run has not been judged.</p>`}
      ${s
        ? html`<pl-data-table
            .caption=${'component scores (scaled units): simulated runs, then the trail of this run'}
            .columns=${[{ label: 'what' }, { label: 'upTo', unit: 's' }, { label: 'component 1' }, { label: 'component 2' }]}
            .rows=${() => this.rows()}
          ></pl-data-table>`
        : nothing}`;
  }

  override updated(changed: PropertyValues<this>): void {
    const twoD = this.twoD();
    if (twoD !== this.shownTwoD) {
      this.shownTwoD = twoD;
      this.chart.configure();
    }
    const prev = changed.get('detail') as RunDetail | undefined;
    const scoresChanged = changed.has('detail') && (prev?.scores !== this.detail?.scores || prev?.run.judgement?.kind !== this.detail?.run.judgement?.kind);
    if (scoresChanged || changed.has('alpha')) this.chart.setSeries(this.series());
  }

  /** Two kept components (else the second axis has nothing on it). */
  private twoD(): boolean {
    return (this.detail?.scores?.eigenvalues[1] ?? 0) > 0;
  }

  private baseOption(): ChartOption {
    const axis = (name: string) => ({
      type: 'value' as const,
      name,
      nameLocation: 'middle' as const,
      nameGap: 26,
      scale: true,
      splitNumber: 4,
      axisLabel: { color: COLORS.muted, hideOverlap: true },
      splitLine: { lineStyle: { color: '#eef0f3' } },
    });
    return {
      grid: { outerBoundsMode: 'none', left: 52, right: 14, top: 14, bottom: 40 },
      aria: { enabled: true },
      xAxis: axis('component 1 (scaled units)'),
      yAxis: this.twoD()
        ? { ...axis('component 2 (scaled units)'), nameGap: 36, min: () => undefined, max: () => undefined, axisLabel: { show: true, color: COLORS.muted, hideOverlap: true } }
        : { ...axis('spread for display only'), nameGap: 12, min: -1, max: 1, axisLabel: { show: false, color: COLORS.muted } },
      tooltip: { trigger: 'item', renderMode: 'richText', confine: true, formatter: (p: unknown) => this.tooltip(p) },
    };
  }

  private series(): SeriesOption[] {
    const s = this.detail?.scores;
    const j = this.detail?.run.judgement;
    const xs = s?.sims[0] ?? [];
    const ys = s?.sims[1] ?? [];
    const [l1, l2] = s?.eigenvalues ?? [0, 0];
    const twoD = l2 > 0;
    // With one component, spread the cloud vertically (golden-ratio sequence) so points do not hide each other.
    const spread = (i: number) => (((i * 0.6180339887) % 1) - 0.5) * 1.4;
    const trail = s?.trail ?? [];
    const last = trail[trail.length - 1];
    const provisional = j?.kind !== 'final';
    const half = Math.sqrt(Math.max(0, l1 * chiSquareUpper(this.alpha, 1)));
    return [
      {
        id: 'cloud',
        name: 'simulated runs',
        type: 'scatter',
        data: xs.map((x, i) => [x, twoD ? ys[i] : spread(i)]),
        symbol: 'circle',
        symbolSize: 5,
        large: true,
        largeThreshold: 200,
        itemStyle: { color: 'rgba(0,0,0,0)', borderColor: COLORS.sim, borderWidth: 1, opacity: 0.7 },
        z: 2,
      },
      {
        id: 'threshold',
        name: 'threshold',
        type: 'line',
        data: s && twoD ? ellipse(l1, l2, chiSquareUpper(this.alpha, 2)) : [],
        symbol: 'none',
        silent: true,
        lineStyle: { color: COLORS.alpha, width: 1.6, type: [6, 3] },
        markLine:
          s && !twoD && half > 0
            ? { silent: true, symbol: 'none', lineStyle: { color: COLORS.alpha, type: [6, 3] }, label: { show: false }, data: [{ xAxis: -half }, { xAxis: half }] }
            : { data: [] },
        z: 1,
      },
      {
        id: 'trail',
        name: 'trail of this run',
        type: 'line',
        data: trail.map(([upTo, x, y]) => ({ value: [x, twoD ? y : 0], name: String(upTo) })),
        symbol: 'circle',
        symbolSize: 4,
        lineStyle: { color: COLORS.live, width: 1.2, opacity: 0.8 },
        itemStyle: { color: COLORS.live },
        z: 3,
      },
      {
        id: 'now',
        name: 'this run',
        type: 'scatter',
        data: last ? [{ value: [last[1], twoD ? last[2] : 0], name: String(last[0]) }] : [],
        symbol: 'diamond',
        symbolSize: 15,
        itemStyle: provisional ? { color: '#fff', borderColor: COLORS.live, borderWidth: 2.5 } : { color: COLORS.live, borderColor: '#fff', borderWidth: 1 },
        z: 4,
      },
    ];
  }

  private tooltip(p: unknown): string {
    const item = p as { seriesId?: string; seriesName?: string; value?: [number, number]; name?: string };
    if (!item.value) return '';
    const at = item.seriesId === 'trail' || item.seriesId === 'now' ? ` (judged to ${item.name ?? '?'} s)` : '';
    return `${item.seriesName ?? ''}${at}\ncomponent 1: ${formatValue(item.value[0])}\ncomponent 2: ${formatValue(item.value[1])}`;
  }

  private rows(): TableCell[][] {
    const s = this.detail?.scores;
    if (!s) return [];
    const sims: TableCell[][] = s.sims[0].map((x, i) => ['simulated run', null, x, s.sims[1][i]]);
    const trail: TableCell[][] = s.trail.map(([upTo, x, y]) => ['this run', upTo, x, y]);
    return [...sims, ...trail];
  }
}

customElements.define('pl-score-view', PlScoreView);

declare global {
  interface HTMLElementTagNameMap {
    'pl-score-view': PlScoreView;
  }
}
