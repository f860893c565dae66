import { LitElement, css, html, nothing, type PropertyValues } from 'lit';
import { formatClock, formatCondition } from './format.js';
import { groupRuns, SORT_LABELS, type EventView, type RunView, type SortMode, type VignetteGroup } from './model.js';
import { baselineStatus, liveStatus, pValue, rankText } from './parts.js';
import { shared } from './theme.js';

/**
 * Event overview: every vignette (test condition, baseline status) with its live runs (live
 * status, per-run p-value, flags, notes), sortable by plan order, p-value or time.
 *
 * Slots: none. Parts: none.
 * Events:
 * - `run-select` (detail `{ key }`): a run row was clicked or chosen with Enter/Space.
 * - `sort-change` (detail `{ sort }`): the user picked another order.
 * Keyboard: the selected row is the one tab stop; j/k or ↓/↑ move (handled by pl-app for the page).
 */
export class PlEventOverview extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .head {
        display: flex;
        align-items: center;
        justify-content: space-between;
        gap: 8px;
        margin-bottom: 6px;
      }
      .sort {
        display: inline-flex;
        border: 1px solid var(--pl-rule);
        border-radius: 4px;
        overflow: hidden;
      }
      .sort button {
        border: 0;
        background: #fff;
        padding: 2px 8px;
        font-size: 11.5px;
      }
      .sort button + button {
        border-left: 1px solid var(--pl-rule);
      }
      .sort button[aria-pressed='true'] {
        background: var(--pl-ink);
        color: #fff;
      }
      table {
        width: 100%;
        border-collapse: collapse;
      }
      th {
        text-align: left;
        font-size: 11px;
        font-weight: 600;
        color: var(--pl-muted);
        padding: 2px 6px;
        border-bottom: 1px solid var(--pl-rule);
      }
      tbody.vignette tr.vhead td {
        padding: 7px 6px 2px;
        border-top: 1px solid var(--pl-rule);
      }
      tbody.vignette:first-of-type tr.vhead td {
        border-top: 0;
      }
      .small {
        font-size: 11px;
      }
      .vhead div {
        overflow-wrap: anywhere;
      }
      .vid {
        font-weight: 700;
        margin-right: 6px;
      }
      .label {
        color: var(--pl-ink);
      }
      .cond {
        color: var(--pl-muted);
        font-size: 11.5px;
      }
      .vmeta {
        display: flex;
        flex-wrap: wrap;
        gap: 4px 12px;
        font-size: 11.5px;
        margin-top: 1px;
      }
      tr.run td {
        padding: 3px 6px;
        vertical-align: middle;
      }
      tr.run {
        cursor: pointer;
      }
      tr.run:hover td {
        background: #f6f7f9;
      }
      tr.run[aria-selected='true'] td {
        background: var(--pl-selected);
      }
      tr.run[aria-selected='true'] td:first-child {
        box-shadow: inset 4px 0 0 var(--pl-ink);
      }
      tr.run:focus-visible {
        outline: 3px solid var(--pl-focus);
        outline-offset: -3px;
      }
      tr.none td {
        padding: 3px 6px 5px;
        color: var(--pl-muted);
        font-style: italic;
        font-size: 12px;
      }
      .track {
        font-weight: 600;
        white-space: nowrap;
      }
      .status {
        white-space: nowrap;
        font-size: 12px;
        line-height: 1.35;
        display: inline-block;
      }
      :host {
        overflow-x: auto;
      }
      .st-ok {
        color: var(--pl-ok);
      }
      .st-busy {
        color: var(--pl-busy);
      }
      .st-waiting {
        color: var(--pl-muted);
      }
      .st-failed {
        color: var(--pl-low);
      }
      .st-flight {
        color: var(--pl-ok);
      }
      .st-done {
        color: var(--pl-ink);
      }
      .notes {
        white-space: nowrap;
        color: var(--pl-muted);
      }
      .flags {
        display: flex;
        flex-wrap: wrap;
        gap: 3px;
      }
      .combined {
        font-size: 11.5px;
      }
      .why {
        font-size: 11px;
        color: var(--pl-muted);
      }
    `,
  ];

  static override properties = {
    event: { attribute: false },
    selected: { type: String },
    sort: { type: String },
  };

  declare event: EventView | undefined;
  declare selected: string | undefined;
  declare sort: SortMode;

  constructor() {
    super();
    this.sort = 'plan';
  }

  override render() {
    const ev = this.event;
    if (!ev) return html`<p class="muted">Waiting for the event state…</p>`;
    const groups = groupRuns(ev, this.sort);
    const alpha = ev.plan.alpha;
    return html`
      <div class="head">
        <h2 id="ov-title">Event overview</h2>
        <div class="sort" role="group" aria-label="Sort runs by">
          ${(Object.keys(SORT_LABELS) as SortMode[]).map(
            (m) => html`<button type="button" aria-pressed=${String(this.sort === m)} title=${`sort by ${SORT_LABELS[m]}`} @click=${() => this.onSort(m)}>
              ${m === 'plan' ? 'plan' : m === 'p' ? 'p-value' : 'time'}
            </button>`,
          )}
        </div>
      </div>
      <table aria-labelledby="ov-title" aria-describedby="ov-help">
        <thead>
          <tr>
            <th scope="col">Run</th>
            <th scope="col">Live status</th>
            <th scope="col">p (overall)</th>
            <th scope="col">Flags · notes</th>
          </tr>
        </thead>
        ${groups.map((g) => this.renderGroup(g, alpha))}
      </table>
      <p id="ov-help" class="caption">
        Sorted by ${SORT_LABELS[this.sort]}. Keys: <kbd>j</kbd>/<kbd>k</kbd> or <kbd>↓</kbd>/<kbd>↑</kbd> move between runs. ◆/● final p (◆ at or below α = ${alpha});
        ◇/○ <i>provisional</i>, while the run is in flight.
      </p>
    `;
  }

  private renderGroup(g: VignetteGroup, alpha: number) {
    const v = g.vignette;
    const cond = formatCondition(v.condition);
    return html`<tbody class="vignette" data-vignette=${v.id}>
      <tr class="vhead">
        <td colspan="4">
          <div><span class="vid">${v.id}</span>${v.label ? html`<span class="label">${v.label}</span>` : nothing}</div>
          <div class="vmeta">
            ${cond ? html`<span class="cond">${cond}</span>` : nothing} ${baselineStatus(v)}
            ${v.combined && v.combined.count > 1
              ? html`<span class="combined" title=${v.combined.note}>vignette combined (${v.combined.count} runs, led by ${v.combined.leading === 'l2' ? 'L2' : v.combined.leading}): ${pValue(v.combined.pValue, 'final', alpha, { compact: true })}</span>`
              : nothing}
            ${v.adjustedPValue !== undefined
              ? html`<span class="combined" title="Holm-adjusted over the event's vignettes">Holm-adjusted ${pValue(v.adjustedPValue, 'final', alpha, { compact: true })}${v.verdict ? html` <span class="muted">(${v.verdict})</span>` : nothing}</span>`
              : nothing}
            ${v.evidence
              ? html`<span class="combined" data-evidence title=${v.evidence.advice.message}
                  >evidence <span class="num">${v.evidence.current.toPrecision(3)}</span>${v.evidence.established
                    ? html` <strong>▲ established</strong>`
                    : html` <span class="muted">of ${Math.round(1 / alpha)}${v.evidence.advice.additionalRuns !== null ? html` · ~${v.evidence.advice.additionalRuns} more run${v.evidence.advice.additionalRuns === 1 ? '' : 's'} advised` : v.evidence.advice.futile ? html` · more runs unlikely to change this` : nothing}</span>`}</span
                >`
              : nothing}
          </div>
        </td>
      </tr>
      ${g.runs.length === 0 ? html`<tr class="none"><td colspan="4">no live run yet</td></tr>` : g.runs.map((r) => this.renderRun(r, v.horizon, alpha))}
    </tbody>`;
  }

  private renderRun(r: RunView, horizon: number, alpha: number) {
    const selected = r.key === this.selected;
    const j = r.judgement;
    const flags = [...new Set([...r.flags, ...(j?.flags ?? [])])];
    return html`<tr
      class="run"
      data-run=${r.key}
      tabindex=${selected ? 0 : -1}
      aria-selected=${String(selected)}
      @click=${() => this.choose(r.key)}
      @keydown=${(e: KeyboardEvent) => this.onRowKey(e, r.key)}
    >
      <td><div class="track">${r.track}</div><div class="muted num small" title="opened (server clock)">${formatClock(r.openedAt)}</div></td>
      <td>${liveStatus(r, horizon, true)}</td>
      <td class="pcell">
        ${j ? pValue(j.pValues.overall, j.kind, alpha, { count: rankText(j.pValues.overall, j.simsUsed) }) : nothing}
        ${j && j.kind === 'provisional' ? html`<div class="why">judged to ${j.upTo} s</div>` : nothing}
        ${!j ? html`<div class="why">${r.notJudged ?? 'not judged yet'}</div>` : nothing}
      </td>
      <td>
        <span class="flags"
          >${flags.map((f) => html`<span class="chip flag"><span aria-hidden="true">⚑</span> ${f}</span>`)}<span class="notes" title="notes on this run"
            ><span aria-hidden="true">✎</span> <span class="num">${r.notes}</span><span class="sr-only"> notes</span></span
          ></span
        >
      </td>
    </tr>`;
  }

  /** Keep the selected row in view, and keyboard focus on it when focus was on a row. */
  override updated(changed: PropertyValues<this>): void {
    if (!changed.has('selected')) return;
    const row = this.shadowRoot?.querySelector<HTMLElement>(`tr.run[aria-selected='true']`);
    const active = this.shadowRoot?.activeElement;
    if (active instanceof HTMLTableRowElement && active !== row) row?.focus();
    if (changed.get('selected') !== undefined) row?.scrollIntoView({ block: 'nearest' });
  }

  private choose(key: string): void {
    this.dispatchEvent(new CustomEvent('run-select', { detail: { key }, bubbles: true, composed: true }));
  }

  private onRowKey(e: KeyboardEvent, key: string): void {
    if (e.key === 'Enter' || e.key === ' ') {
      e.preventDefault();
      this.choose(key);
    }
  }

  private onSort(sort: SortMode): void {
    this.dispatchEvent(new CustomEvent('sort-change', { detail: { sort }, bubbles: true, composed: true }));
  }
}

customElements.define('pl-event-overview', PlEventOverview);

declare global {
  interface HTMLElementTagNameMap {
    'pl-event-overview': PlEventOverview;
  }
}
