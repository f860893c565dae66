import { LitElement, css, html, nothing, type PropertyValues } from 'lit';
import { formatClock, formatT } from './format.js';
import { newestFirst, runKey, type LogEntryView, type RunView } from './model.js';
import type { NoteInput } from './store.js';
import { shared } from './theme.js';

const SHOWN = 200;
const AUTHOR_KEY = 'plumbline.author';
const KIND: Record<LogEntryView['kind'], { mark: string; word: string }> = {
  note: { mark: '✎', word: 'note' },
  flag: { mark: '⚑', word: 'flag' },
  event: { mark: '•', word: 'event' },
};

/**
 * Notes and flags: the event log newest first (each entry linked to its run and track time), and a
 * form that adds a note to the selected run at its current track time. Everything written by
 * producers and people is shown as text.
 *
 * Slots: none. Parts: none.
 * Events: `run-select` (detail `{ key }`) when an entry's run link is used.
 */
export class PlLogPanel extends LitElement {
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      form {
        display: grid;
        gap: 6px;
        margin: 8px 0 10px;
        padding: 8px;
        background: #f7f8fa;
        border: 1px solid var(--pl-rule);
        border-radius: 4px;
      }
      label {
        font-size: 11.5px;
        color: var(--pl-muted);
      }
      textarea,
      input {
        font: inherit;
        width: 100%;
        border: 1px solid #b9c0cb;
        border-radius: 3px;
        padding: 4px 6px;
        background: #fff;
      }
      textarea {
        min-height: 48px;
        resize: vertical;
      }
      .row {
        display: flex;
        gap: 8px;
        align-items: end;
      }
      .row > :first-child {
        flex: 1;
      }
      button[type='submit'] {
        border: 1px solid var(--pl-ink);
        background: var(--pl-ink);
        color: #fff;
        border-radius: 3px;
        padding: 4px 12px;
        white-space: nowrap;
      }
      button[disabled] {
        opacity: 0.45;
        cursor: not-allowed;
      }
      .error {
        color: #9a3a00;
        background: #fdf0e6;
        border-left: 3px solid var(--pl-low);
        padding: 3px 6px;
        font-size: 12px;
      }
      .ok {
        color: var(--pl-ok);
        font-size: 12px;
      }
      ol {
        list-style: none;
        margin: 0;
        padding: 0 4px 0 0;
        max-height: var(--pl-log-height, 520px);
        overflow-y: auto;
      }
      li {
        padding: 5px 0;
        border-top: 1px solid #eef0f3;
        display: grid;
        grid-template-columns: 58px 1fr;
        gap: 0 8px;
      }
      li.note .kind {
        color: var(--pl-ink);
        font-weight: 600;
      }
      li.flag .kind {
        color: #7a3500;
        font-weight: 600;
      }
      .when {
        color: var(--pl-muted);
        font-size: 11.5px;
      }
      .meta {
        font-size: 11.5px;
        color: var(--pl-muted);
        display: flex;
        gap: 6px;
        flex-wrap: wrap;
        align-items: baseline;
      }
      .link {
        border: 0;
        background: none;
        padding: 0;
        color: #1b5fae;
        text-decoration: underline;
        font-size: 11.5px;
      }
      .text {
        white-space: pre-wrap;
        overflow-wrap: anywhere;
      }
      .author {
        color: var(--pl-muted);
        font-style: italic;
      }
    `,
  ];

  static override properties = {
    log: { attribute: false },
    run: { attribute: false },
    connected: { type: Boolean },
    sendNote: { attribute: false },
    _text: { state: true },
    _author: { state: true },
    _sending: { state: true },
    _error: { state: true },
    _done: { state: true },
  };

  declare log: readonly LogEntryView[];
  /** The selected run (notes go to it, at its current track time). */
  declare run: RunView | undefined;
  declare connected: boolean;
  /** Sends a note; resolves with the log entry id or rejects with an Error (code and message). */
  declare sendNote: ((note: NoteInput) => Promise<number>) | undefined;

  declare private _text: string;
  declare private _author: string;
  declare private _sending: boolean;
  declare private _error: string;
  declare private _done: string;
  private ordered: LogEntryView[] = [];

  constructor() {
    super();
    this.log = [];
    this.connected = false;
    this._text = '';
    this._author = readAuthor();
    this._sending = false;
    this._error = '';
    this._done = '';
  }

  override willUpdate(changed: PropertyValues<this>): void {
    if (changed.has('log')) this.ordered = newestFirst(this.log);
    if (changed.has('run') && (changed.get('run') as RunView | undefined)?.key !== this.run?.key) {
      this._done = '';
      this._error = '';
    }
  }

  override render() {
    const r = this.run;
    const canSend = r !== undefined && this.connected && !this._sending && this._text.trim().length > 0;
    return html`
      <form @submit=${this.onSubmit} aria-describedby="note-target">
        <label for="note-text" id="note-target"
          >${r ? html`Note on <strong>${r.key}</strong> at track time <span class="num">${formatT(r.lastT)}</span>` : 'Select a run to add a note'}</label
        >
        <textarea id="note-text" .value=${this._text} @input=${this.onText} ?disabled=${!r} maxlength="2000" placeholder="What did you see?"></textarea>
        <div class="row">
          <div>
            <label for="note-author">Author</label>
            <input id="note-author" .value=${this._author} @input=${this.onAuthor} maxlength="128" autocomplete="name" placeholder="name or role" />
          </div>
          <button type="submit" ?disabled=${!canSend}>${this._sending ? 'Sending…' : 'Add note'}</button>
        </div>
        ${this._error ? html`<div class="error" role="alert">${this._error}</div>` : nothing}
        ${this._done ? html`<div class="ok" role="status">${this._done}</div>` : nothing}
        ${!this.connected ? html`<div class="muted" role="status">Not connected: notes cannot be sent now.</div>` : nothing}
      </form>
      <ol aria-label="event log, newest first" tabindex="0">
        ${this.ordered.slice(0, SHOWN).map((e) => this.renderEntry(e))}
      </ol>
      ${this.ordered.length > SHOWN ? html`<p class="caption">Showing the latest ${SHOWN} of ${this.ordered.length} entries; the journal keeps all.</p>` : nothing}
      ${this.ordered.length === 0 ? html`<p class="caption">Nothing logged yet.</p>` : nothing}
    `;
  }

  private renderEntry(e: LogEntryView) {
    const k = KIND[e.kind] ?? KIND.event;
    const key = e.vignette && e.track ? runKey(e.vignette, e.track) : undefined;
    return html`<li class=${e.kind} data-entry=${e.id}>
      <span class="when num" title="local time">${formatClock(e.at)}</span>
      <div>
        <div class="meta">
          <span class="kind"><span aria-hidden="true">${k.mark}</span> ${k.word}</span>
          ${key
            ? html`<button type="button" class="link" @click=${() => this.select(key)} title="select this run">${key}${e.t !== undefined ? ` · t = ${formatT(e.t)}` : ''}</button>`
            : e.vignette
              ? html`<span>${e.vignette}</span>`
              : nothing}
        </div>
        <div class="text">${e.text}${e.author ? html` <span class="author">— ${e.author}</span>` : nothing}</div>
      </div>
    </li>`;
  }

  private onText(e: Event): void {
    this._text = (e.target as HTMLTextAreaElement).value;
    this._done = '';
  }

  private onAuthor(e: Event): void {
    this._author = (e.target as HTMLInputElement).value;
    try {
      localStorage.setItem(AUTHOR_KEY, this._author);
    } catch {
      // storage refused (private mode): the name is kept for this page only
    }
  }

  private async onSubmit(e: Event): Promise<void> {
    e.preventDefault();
    const r = this.run;
    const text = this._text.trim();
    if (!r || !text || !this.sendNote || this._sending) return;
    this._sending = true;
    this._error = '';
    this._done = '';
    try {
      const author = this._author.trim();
      await this.sendNote({ vignette: r.vignette, track: r.track, t: Math.max(0, r.lastT), text, ...(author ? { author } : {}) });
      this._text = '';
      this._done = `Note added to ${r.key}.`;
    } catch (err) {
      const code = err instanceof Error && 'code' in err ? `${String((err as { code: unknown }).code)}: ` : '';
      this._error = `The note was not recorded. ${code}${err instanceof Error ? err.message : String(err)}`;
    } finally {
      this._sending = false;
    }
  }

  private select(key: string): void {
    this.dispatchEvent(new CustomEvent('run-select', { detail: { key }, bubbles: true, composed: true }));
  }
}

function readAuthor(): string {
  try {
    return localStorage.getItem(AUTHOR_KEY) ?? '';
  } catch {
    return '';
  }
}

customElements.define('pl-log-panel', PlLogPanel);

declare global {
  interface HTMLElementTagNameMap {
    'pl-log-panel': PlLogPanel;
  }
}
