import { LitElement, css, html, nothing } from 'lit';
import { formatClock, formatCondition, formatValue } from './format.js';
import type { EventView, RunDetail, RunView } from './model.js';
import { liveStatus, pValue, rankText } from './parts.js';
import { COLORS, shared } from './theme.js';
import './channel-chart.js';

/**
 * Run detail: what the selected run is (vignette, condition, status on the event clock), its
 * verdict (overall and per-statistic p-values, flags, RMS deviation in channel units) and one
 * chart per channel against the simulation.
 *
 * Slots: none. Parts: none. Events: none.
 */
export class PlRunDetail extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .title {
        display: flex;
        flex-wrap: wrap;
        align-items: baseline;
        gap: 4px 12px;
        margin: 2px 0 4px;
      }
      .name {
        font-size: 18px;
        font-weight: 700;
      }
      .facts {
        display: flex;
        flex-wrap: wrap;
        gap: 4px 18px;
        font-size: 12.5px;
        align-items: baseline;
      }
      .verdict,
      .practical {
        display: flex;
        flex-wrap: wrap;
        gap: 4px 18px;
        align-items: baseline;
        margin: 6px 0 2px;
        padding: 6px 8px;
        background: #f7f8fa;
        border: 1px solid var(--pl-rule);
        border-radius: 4px;
      }
      .overall {
        font-size: 16px;
      }
      .overall .p .value {
        font-size: 18px;
      }
      .stat {
        font-size: 12px;
      }
      .charts {
        display: grid;
        grid-template-columns: repeat(auto-fit, minmax(420px, 1fr));
        gap: 14px;
        margin-top: 8px;
      }
      .key {
        display: flex;
        flex-wrap: wrap;
        gap: 2px 14px;
        font-size: 11.5px;
        color: var(--pl-muted);
        margin-top: 6px;
      }
      .key > span {
        display: inline-flex;
        align-items: center;
        gap: 2px;
      }
      .swatch {
        display: inline-block;
        width: 12px;
        height: 9px;
        margin-right: 2px;
        border-radius: 1px;
      }
      .swatch.line {
        width: 18px;
        height: 0;
        border-top: 2px solid;
        margin-right: 4px;
      }
      .swatch.line.thin {
        border-top-width: 1px;
      }
      .swatch.line.thick {
        border-top-width: 3px;
      }
      .swatch.line.dashed {
        border-top-style: dashed;
      }
      .vline {
        display: inline-block;
        width: 0;
        height: 11px;
        border-left: 1.5px solid;
        margin: 0 5px 0 6px;
      }
      .dot {
        display: inline-block;
        width: 4px;
        height: 4px;
        border-radius: 50%;
        margin: 0 6px 0 4px;
      }
      .status {
        white-space: nowrap;
      }
      .st-flight {
        color: var(--pl-ok);
      }
      .bar {
        --pl-bar-width: 60px;
        --pl-bar-height: 6px;
      }
      .warn {
        color: #7a3500;
      }
    `,
  ];

  static override properties = {
    event: { attribute: false },
    run: { attribute: false },
    detail: { attribute: false },
    error: { type: String },
  };

  declare event: EventView | undefined;
  /** The selected run as last received (moves at the update rate). */
  declare run: RunView | undefined;
  /** Its detail (only when it belongs to `run`). */
  declare detail: RunDetail | undefined;
  declare error: string | undefined;

  override render() {
    const ev = this.event;
    const r = this.run;
    if (!ev || !r) return html`<h2>Run detail</h2><p class="muted">Select a run in the overview (or press <kbd>j</kbd>).</p>`;
    const v = ev.vignettes.find((x) => x.id === r.vignette);
    const horizon = v?.horizon ?? Math.max(1, r.lastT);
    const alpha = ev.plan.alpha;
    return html`
      <h2>Run detail</h2>
      <div class="title">
        <span class="name" data-selected-run=${r.key}>${r.vignette} · ${r.track}</span>
        ${v?.label ? html`<span>${v.label}</span>` : nothing}
        ${v?.condition ? html`<span class="muted">${formatCondition(v.condition)}</span>` : nothing}
      </div>
      <div class="facts">
        ${liveStatus(r, horizon)}
        <span>opened <span class="num">${formatClock(r.openedAt)}</span>${r.closedAt ? html`, closed <span class="num">${formatClock(r.closedAt)}</span>` : nothing}</span>
        <span><span class="num">${r.points}</span> samples</span>
        ${r.notes ? html`<span><span aria-hidden="true">✎</span> ${r.notes} note${r.notes === 1 ? '' : 's'}</span>` : nothing}
      </div>
      ${this.renderVerdict(r, alpha)}
      ${this.error ? html`<p class="warn" role="status">Could not load the run's curves: ${this.error}</p>` : nothing}
      ${!this.detail ? html`<p class="muted" role="status">Loading the run's curves…</p>` : nothing}
      <div class="key" aria-label="key to the charts">
        <span><span class="swatch" style="background:${COLORS.band50}"></span><span class="swatch" style="background:${COLORS.band90}"></span><span class="swatch" style="background:${COLORS.band99}"></span>pointwise 50 / 90 / 99 % of the simulated runs</span>
        <span><span class="swatch line dashed" style="border-color:${COLORS.simultaneous}"></span>simultaneous ${this.simultaneousLevel()} band (whole track)</span>
        <span><span class="swatch line" style="border-color:${COLORS.simDark}"></span>simulated mean</span>
        <span><span class="swatch line thin" style="border-color:${COLORS.texture}"></span>a few simulated runs</span>
        <span><span class="dot" style="background:${COLORS.raw}"></span>live samples</span>
        <span><span class="swatch line thick" style="border-color:${COLORS.live}"></span>live, smoothed (judged window)</span>
        <span><span class="swatch line dashed" style="border-color:${COLORS.projection}"></span>projected remainder ${this.projectionLevel()}(in flight)</span>
        <span><span class="vline" style="border-color:${COLORS.ink}"></span>now (in flight)</span>
      </div>
      <p class="caption">Drag or use the wheel on a chart (or the slider under it) to zoom track time; the channels of a run zoom together and keep the zoom as data arrives.</p>
      <div class="charts">
        ${ev.plan.channels.map(
          (c, i) => html`<pl-channel-chart .detail=${this.detail} .channel=${i} .name=${c.name} .unit=${c.unit} .horizon=${horizon}></pl-channel-chart>`,
        )}
      </div>
    `;
  }

  private simultaneousLevel(): string {
    const level = this.detail?.envelope?.[0]?.simultaneous.level;
    return level === undefined ? '' : `${Math.round(level * 100)} %`;
  }

  private projectionLevel(): string {
    const level = this.detail?.projection?.level;
    return level === undefined ? '' : `with its ${Math.round(level * 100)} % band `;
  }

  private renderVerdict(r: RunView, alpha: number) {
    const j = r.judgement;
    if (!j) {
      return html`<div class="verdict"><span class="muted">Not judged yet${r.notJudged ? html`: ${r.notJudged}` : nothing}.</span></div>`;
    }
    const units = this.event?.plan.channels ?? [];
    const flags = [...new Set([...r.flags, ...j.flags])];
    return html`<div class="verdict" data-verdict=${r.key}>
      <span class="overall">overall ${pValue(j.pValues.overall, j.kind, alpha, { count: rankText(j.pValues.overall, j.simsUsed) })}</span>
      ${j.kind === 'provisional' ? html`<span class="muted">judged on 0–${j.upTo} s so far; final when the run closes</span>` : nothing}
      <span class="stat">l2 ${pValue(j.pValues.l2, j.kind, alpha, { compact: true })}</span>
      <span class="stat">score ${pValue(j.pValues.score, j.kind, alpha, { compact: true })}</span>
      <span class="stat">residual ${pValue(j.pValues.residual, j.kind, alpha, { compact: true })}</span>
      <span class="stat muted"><span class="num">${j.simsUsed}</span> simulated runs · <span class="num">${j.components}</span> component${j.components === 1 ? '' : 's'}</span>
      ${j.rms.length
        ? html`<span class="stat" title="root-mean-square deviation from the simulated mean over the judged window"
            >RMS from sim. mean: ${j.rms.map((x, i) => html`${i ? ', ' : ''}${units[i]?.name ?? `channel ${i + 1}`} <span class="num">${formatValue(x, 3)}</span> ${units[i]?.unit ?? ''}`)}</span
          >`
        : nothing}
      ${flags.length ? html`<span>${flags.map((f) => html`<span class="chip flag"><span aria-hidden="true">⚑</span> ${f}</span> `)}</span>` : nothing}
    </div>
    ${this.renderPractical(j)}`;
  }

  /** The practical answer (physical units, tolerance) and the kind of discrepancy: separate from the p-value. */
  private renderPractical(j: NonNullable<RunView['judgement']>) {
    const rows = j.practical ?? [];
    if (rows.length === 0 && !j.diagnosis) return nothing;
    return html`<div class="practical" data-practical>
      <span class="muted">Practically:</span>
      ${rows.map(
        (d) => html`<span class="stat"
          >${d.channel}: ${d.leavesBand
            ? html`leaves the 95 % band by up to <span class="num">${formatValue(d.maxExcess, 3)}</span> ${d.unit}${d.maxExcessAt !== undefined ? html` at <span class="num">${formatValue(d.maxExcessAt, 3)}</span> s` : nothing},
                <span class="num">${formatValue(d.timeOutside, 3)}</span> s outside`
            : html`inside the 95 % band`};
          largest deviation <span class="num">${formatValue(d.maxDeviation, 3)}</span> ${d.unit};
          ${d.withinTolerance === undefined
            ? html`<span class="muted">no tolerance in the plan</span>`
            : d.withinTolerance
              ? html`<span class="chip ok">○ within ±${d.tolerance} ${d.unit}</span>`
              : html`<span class="chip flag">▲ beyond ±${d.tolerance} ${d.unit}</span>`}</span
        >`,
      )}
      ${j.diagnosis
        ? html`<span class="stat" title=${j.diagnosis.reason}
            >kind: <strong>${j.diagnosis.kind}</strong>${j.diagnosis.timeShift !== undefined
              ? html` (${j.diagnosis.timing === 'warp' ? 'lag at end' : 'shift'} <span class="num">${formatValue(j.diagnosis.timeShift, 3)}</span> s)`
              : nothing}</span
          >`
        : nothing}
    </div>`;
  }
}

customElements.define('pl-run-detail', PlRunDetail);

declare global {
  interface HTMLElementTagNameMap {
    'pl-run-detail': PlRunDetail;
  }
}
