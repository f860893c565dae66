import { LitElement, css, html, nothing, type PropertyValues } from 'lit';
import { formatP } from './format.js';
import { runOrder, stepSelection, type EventView, type SortMode, type ViewState } from './model.js';
import { pValue } from './parts.js';
import type { EventStore, NoteInput } from './store.js';
import { COLORS, pageVars, shared } from './theme.js';
import type { EvidenceSeries } from './evidence-timeline.js';
import './debrief-link.js';
import './event-overview.js';
import './evidence-timeline.js';
import './log-panel.js';
import './run-detail.js';
import './score-view.js';
import './statistic-view.js';

/**
 * The page: header (event, connection, combined evidence, cautions) and the panels in one layout.
 * It renders the store's latest view (published at most once per animation frame), turns panel
 * events into store commands, and walks the runs with the keyboard (j/k, ↓/↑).
 *
 * Slots: none. Parts: none. Events: none (listens to `run-select` and `sort-change` from panels).
 */
export class PlApp extends LitElement {
  static override styles = [
    pageVars,
    shared,
    css`
      :host {
        display: block;
        min-height: 100vh;
        background: var(--pl-page);
      }
      header {
        display: flex;
        flex-wrap: wrap;
        align-items: center;
        gap: 6px 22px;
        padding: 8px 16px;
        background: #1b2330;
        color: #fff;
      }
      .brand {
        font-weight: 750;
        letter-spacing: 0.02em;
        font-size: 15px;
      }
      .brand small {
        font-weight: 400;
        opacity: 0.7;
        margin-left: 6px;
      }
      .event-name {
        font-size: 14px;
      }
      .conn {
        font-size: 12px;
        display: inline-flex;
        gap: 5px;
        align-items: center;
        padding: 1px 8px;
        border-radius: 10px;
        border: 1px solid rgba(255, 255, 255, 0.35);
      }
      .conn.open {
        color: #7fe0c3;
      }
      .conn.waiting {
        color: #ffc58a;
        border-style: dashed;
      }
      .spacer {
        flex: 1;
      }
      .combined {
        font-size: 13px;
        background: #fff;
        color: var(--pl-ink);
        padding: 3px 10px;
        border-radius: 4px;
        display: inline-flex;
        gap: 8px;
        align-items: baseline;
      }
      .combined .parts {
        font-size: 12px;
        color: var(--pl-muted);
      }
      .combined .part.leading {
        color: var(--pl-ink);
        font-weight: 600;
      }
      .combined .note {
        color: var(--pl-muted);
        font-size: 11px;
      }
      .journal-fault {
        padding: 6px 16px;
        font-size: 13px;
        color: #fff;
        background: #a11d2b;
      }
      .cautions {
        display: flex;
        gap: 6px;
        padding: 4px 16px;
        font-size: 11.5px;
        color: #4b5261;
        background: #e3e6eb;
        border-bottom: 1px solid var(--pl-rule);
      }
      .cautions ul {
        display: inline;
        margin: 0;
        padding: 0;
        list-style: none;
      }
      .cautions li {
        display: inline;
      }
      .cautions li + li::before {
        content: ' · ';
      }
      main {
        display: grid;
        grid-template-columns: minmax(400px, 470px) minmax(0, 1fr);
        gap: 12px;
        padding: 12px 16px 24px;
        align-items: start;
      }
      .side,
      .work {
        display: grid;
        gap: 12px;
        min-width: 0;
      }
      section {
        background: var(--pl-panel);
        border: 1px solid var(--pl-rule);
        border-radius: 6px;
        padding: 10px 12px;
        min-width: 0;
      }
      .analysis {
        display: grid;
        grid-template-columns: minmax(0, 1fr) minmax(0, 1fr) minmax(0, 1.15fr);
        gap: 12px;
        align-items: start;
      }
      section > h2 {
        margin-bottom: 6px;
      }
      @media (max-width: 1100px) {
        main {
          grid-template-columns: 1fr;
        }
        .analysis {
          grid-template-columns: 1fr;
        }
      }
    `,
  ];

  static override properties = {
    store: { attribute: false },
    _view: { state: true },
    _sort: { state: true },
  };

  /** The store this page shows (required). */
  declare store: EventStore | undefined;

  declare private _view: ViewState | undefined;
  declare private _sort: SortMode;
  private evidence: { timeline?: EventView['timeline']; series: readonly EvidenceSeries[] } = { series: [] };
  private readonly onChange = () => {
    this._view = this.store?.view;
  };
  private readonly onKey = (e: KeyboardEvent) => this.handleKey(e);
  private readonly sendNote = (note: NoteInput): Promise<number> => this.store?.sendNote(note) ?? Promise.reject(new Error('no store'));

  constructor() {
    super();
    this._sort = 'plan';
  }

  override connectedCallback(): void {
    super.connectedCallback();
    window.addEventListener('keydown', this.onKey);
    this.attachStore();
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    window.removeEventListener('keydown', this.onKey);
    this.store?.removeEventListener('change', this.onChange);
    this.store?.stop();
  }

  override willUpdate(changed: PropertyValues<this>): void {
    if (changed.has('store')) {
      const prev = changed.get('store') as EventStore | undefined;
      prev?.removeEventListener('change', this.onChange);
      prev?.stop();
      if (this.isConnected) this.attachStore();
    }
    const timeline = this._view?.event?.timeline;
    if (timeline !== this.evidence.timeline) this.evidence = { timeline, series: this.evidenceSeries(this._view?.event) };
  }

  override render() {
    const v = this._view;
    const ev = v?.event;
    const selectedRun = v?.selected ? ev?.runs.find((r) => r.key === v.selected) : undefined;
    const detail = v?.detail && v.detail.run.key === v.selected ? v.detail : undefined;
    const alpha = ev?.plan.alpha ?? 0.05;
    const connected = v?.connection.status === 'open';
    return html`
      <header>
        <span class="brand">plumbline<small>live validation monitor</small></span>
        <span class="event-name">${ev?.plan.name ?? 'connecting…'}</span>
        ${this.renderConnection(v)}
        <span class="spacer"></span>
        ${ev ? html`<pl-debrief-link .event=${ev}></pl-debrief-link>` : nothing}
        ${this.renderCombined(ev)}
      </header>
      ${ev?.journal && !ev.journal.writable
        ? html`<div class="journal-fault" role="alert" id="journal-fault">
            <strong>Not recording:</strong> the journal cannot be written (${ev.journal.reason ?? 'unknown failure'}). Producers' data is
            refused, not acknowledged, until it recovers; nothing acknowledged before is lost.
          </div>`
        : nothing}
      ${ev?.cautions.length
        ? html`<div class="cautions" role="note" aria-label="cautions">
            <span aria-hidden="true">⚠</span>
            <ul>
              ${ev.cautions.map((c) => html`<li>${c}</li>`)}
            </ul>
          </div>`
        : nothing}
      <main @run-select=${this.onSelect} @sort-change=${this.onSort}>
        <div class="side">
          <section aria-label="event overview">
            <pl-event-overview .event=${ev} .selected=${v?.selected} .sort=${this._sort}></pl-event-overview>
          </section>
          <section aria-labelledby="log-title">
            <h2 id="log-title">Notes and flags</h2>
            <pl-log-panel .log=${ev?.log ?? []} .run=${selectedRun} .connected=${connected} .sendNote=${this.sendNote}></pl-log-panel>
          </section>
        </div>
        <div class="work">
          <section aria-label="run detail">
            <pl-run-detail .event=${ev} .run=${selectedRun} .detail=${detail} .error=${v?.detailError}></pl-run-detail>
          </section>
          <div class="analysis">
            <section aria-labelledby="score-title">
              <h2 id="score-title">Scores on components 1–2</h2>
              <pl-score-view .detail=${detail} .alpha=${alpha}></pl-score-view>
            </section>
            <section aria-labelledby="stat-title">
              <h2 id="stat-title">Statistics against the simulated runs</h2>
              <pl-statistic-view .detail=${detail} .alpha=${alpha}></pl-statistic-view>
            </section>
            <section aria-labelledby="ev-title">
              <h2 id="ev-title">Evidence over the event</h2>
              <pl-evidence-timeline .series=${this.evidence.series} .alpha=${alpha}></pl-evidence-timeline>
            </section>
          </div>
        </div>
      </main>
    `;
  }

  private renderConnection(v: ViewState | undefined) {
    const c = v?.connection;
    if (!c || c.status === 'connecting') return html`<span class="conn" role="status"><span aria-hidden="true">◌</span> connecting…</span>`;
    if (c.status === 'open') return html`<span class="conn open" role="status"><span aria-hidden="true">●</span> live</span>`;
    const secs = Math.max(0, Math.round((c.retryAt - Date.now()) / 1000));
    return html`<span class="conn waiting" role="status" title=${c.reason}
      ><span aria-hidden="true">✕</span> disconnected — retrying${secs > 0 ? ` in ${secs} s` : ''} (attempt ${c.attempt})</span
    >`;
  }

  private renderCombined(ev: EventView | undefined) {
    const c = ev?.combined;
    if (!ev) return nothing;
    if (!c) return html`<span class="combined" id="combined"><span class="muted">Combined evidence: no completed run yet</span></span>`;
    const b = c.byStatistic;
    const part = (key: 'l2' | 'score' | 'residual', label: string) =>
      html`<span class=${`part${c.leading === key ? ' leading' : ''}`} data-statistic=${key} data-value=${String(b[key])}>${label} ${formatP(b[key])}</span>`;
    return html`<span class="combined" id="combined" data-value=${String(c.pValue)} title=${c.note}>
      <span>Event combined (${c.count} run${c.count === 1 ? '' : 's'})</span>
      ${pValue(c.pValue, 'final', c.alpha)}
      <span class="parts" aria-label=${`each statistic combined by ${c.method}`}>${part('l2', 'L2')} · ${part('score', 'score')} · ${part('residual', 'residual')}</span>
      <span class="note">fixed-sample: valid only for a run count fixed in advance</span>
    </span>`;
  }

  private attachStore(): void {
    const s = this.store;
    if (!s) return;
    s.removeEventListener('change', this.onChange);
    s.addEventListener('change', this.onChange);
    this._view = s.view;
    s.start();
  }

  private evidenceSeries(ev: EventView | undefined): readonly EvidenceSeries[] {
    if (!ev) return [];
    const method = ev.combined?.method ?? ev.plan.combination;
    return [
      {
        id: 'fixed-sample',
        name: 'combined p (smallest statistic, calibrated)',
        note: `fixed-sample: valid only for a run count fixed in advance. Each statistic's final p-values are combined by ${method}; the smallest of the three is calibrated by seeded Monte Carlo draws of the simulated runs as pseudo-live runs (latest p = ${formatP(ev.combined?.pValue)}). Ties among simulated runs are broken by seeded uniform draws (smoothed p-values), so the numbers are reproducible from the plan's seed.`,
        scale: 'p',
        points: ev.timeline.map((p) => ({ x: p.runs, y: p.pValue, label: p.run, at: p.at })),
      },
      ...(['l2', 'score', 'residual'] as const).map((k, i) => ({
        id: `fixed-${k}`,
        name: `${k === 'l2' ? 'L2' : k} (${method})`,
        note: `${k === 'l2' ? 'L2' : k} p-values combined by ${method} (latest p = ${formatP(ev.combined?.byStatistic[k])})`,
        scale: 'p' as const,
        thin: true,
        color: [COLORS.sim, COLORS.simultaneous, COLORS.busy][i],
        symbol: (['rect', 'triangle', 'circle'] as const)[i],
        points: ev.timeline.flatMap((p) => (p.byStatistic ? [{ x: p.runs, y: p.byStatistic[k], label: p.run, at: p.at }] : [])),
      })),
      {
        id: 'sequential',
        name: 'anytime-valid evidence (test martingale)',
        note: `anytime-valid: may be read after every run and runs may be added at will; a discrepancy is established at ${ev.evidence ? Math.round(ev.evidence.threshold) : '1/α'}${ev.evidence ? ` (now ${ev.evidence.event.current.toPrecision(3)}: the average of L2 ${ev.evidence.event.statistics.l2.current.toPrecision(3)}, score ${ev.evidence.event.statistics.score.current.toPrecision(3)} and residual ${ev.evidence.event.statistics.residual.current.toPrecision(3)}). ${ev.evidence.eventAdvice.message}` : ''}`,
        scale: 'evidence',
        dashed: true,
        symbol: 'diamond',
        points: ev.timeline.flatMap((p) => (p.evidence === undefined ? [] : [{ x: p.runs, y: p.evidence, label: p.run, at: p.at }])),
      },
    ];
  }

  private onSelect(e: CustomEvent<{ key: string }>): void {
    this.store?.select(e.detail.key);
  }

  private onSort(e: CustomEvent<{ sort: SortMode }>): void {
    this._sort = e.detail.sort;
  }

  private handleKey(e: KeyboardEvent): void {
    if (e.defaultPrevented || e.altKey || e.ctrlKey || e.metaKey) return;
    const path = e.composedPath();
    const target = path[0];
    if (target instanceof HTMLElement && (target.isContentEditable || ['INPUT', 'TEXTAREA', 'SELECT'].includes(target.tagName))) return;
    const onRow = path.some((n) => n instanceof HTMLElement && n.dataset.run !== undefined);
    const onPage = target === document.body || target === document.documentElement || target === this;
    let step = 0;
    if (e.key === 'j' || (e.key === 'ArrowDown' && (onRow || onPage))) step = 1;
    else if (e.key === 'k' || (e.key === 'ArrowUp' && (onRow || onPage))) step = -1;
    if (step === 0) return;
    e.preventDefault();
    const next = stepSelection(runOrder(this._view?.event, this._sort), this._view?.selected, step);
    if (next !== undefined) this.store?.select(next);
  }
}

customElements.define('pl-app', PlApp);

declare global {
  interface HTMLElementTagNameMap {
    'pl-app': PlApp;
  }
}
