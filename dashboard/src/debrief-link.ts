import { LitElement, css, html } from 'lit';
import type { EventView } from './model.js';
import { shared } from './theme.js';

/**
 * The debrief package of the event so far as one download (GET /api/debrief.zip: report.html,
 * results.json, runs.csv, notes.csv). A plain link, so the browser's own download handles it and
 * the keyboard reaches it; the label says when the event is unfinished (runs in flight, or
 * vignettes without a judged run), as the report's first page does. A view gathered from several
 * monitors (`plumbline gather`) links each monitor's package of its shard instead.
 *
 * Slots: none. Parts: `link`. Events: none.
 */
export class PlDebriefLink extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: inline-block;
      }
      a {
        display: inline-flex;
        gap: 6px;
        align-items: baseline;
        font-size: 12.5px;
        color: #ffffff;
        text-decoration: none;
        border: 1px solid rgba(255, 255, 255, 0.6);
        border-radius: 4px;
        padding: 2px 9px;
      }
      a:hover {
        background: rgba(255, 255, 255, 0.12);
      }
      a small {
        font-size: 11px;
        color: #d7dce4;
      }
    `,
  ];

  static override properties = {
    event: { attribute: false },
  };

  /** The event as the dashboard sees it (to word the link). */
  declare event: EventView | undefined;

  override render() {
    const ev = this.event;
    const inFlight = ev?.runs.filter((r) => r.status === 'in-flight').length ?? 0;
    const unjudged = ev?.vignettes.filter((v) => v.combined === undefined).length ?? 0;
    const unfinished = inFlight > 0 || unjudged > 0;
    const detail = unfinished ? `event so far${inFlight ? `; ${inFlight} in flight not included` : ''}` : 'report, JSON and CSV';
    // A gathered view (several monitors) has no package of its own: one link per monitor's shard.
    if (ev?.gathered && ev.gathered.length > 0) {
      return html`${ev.gathered.map(
        (m) => html`<a part="link" href=${`${m.url}/api/debrief.zip`} title=${`The debrief package of shard ${m.shard}, from its monitor ${m.url}`}
          ><span aria-hidden="true">⤓</span> Debrief, shard ${m.shard} <small>(${detail})</small></a
        > `,
      )}`;
    }
    return html`<a part="link" href="/api/debrief.zip" download="plumbline-debrief.zip" title="The debrief package: report.html, results.json, runs.csv and notes.csv in one .zip"
      ><span aria-hidden="true">⤓</span> Debrief package <small>(${detail})</small></a
    >`;
  }
}

customElements.define('pl-debrief-link', PlDebriefLink);

declare global {
  interface HTMLElementTagNameMap {
    'pl-debrief-link': PlDebriefLink;
  }
}
