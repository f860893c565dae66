import { LitElement, css, html, nothing } from 'lit';
import { formatValue } from './format.js';
import { shared } from './theme.js';

export interface TableColumn {
  readonly label: string;
  /** Unit shown in the header, e.g. "m". */
  readonly unit?: string;
}

export type TableCell = number | string | null | undefined;

/**
 * The numbers behind a chart, for screen readers and for copying: a disclosure ("Show the numbers")
 * that renders a plain table only while open, and a button that copies it as tab-separated text.
 *
 * Slots: none. Parts: `table`. Events: none.
 */
export class PlDataTable extends LitElement {
  static override styles = [
    shared,
    css`
      details {
        margin-top: 4px;
      }
      summary {
        cursor: pointer;
        color: var(--pl-muted);
        font-size: 11.5px;
        width: fit-content;
      }
      .wrap {
        max-height: 260px;
        overflow: auto;
        border: 1px solid var(--pl-rule);
        margin-top: 4px;
      }
      table {
        border-collapse: collapse;
        font-size: 11.5px;
        width: 100%;
      }
      caption {
        text-align: left;
        padding: 4px 6px;
        color: var(--pl-muted);
      }
      th,
      td {
        padding: 2px 6px;
        text-align: right;
        border-bottom: 1px solid #eef0f3;
        white-space: nowrap;
      }
      th {
        position: sticky;
        top: 0;
        background: #f7f8fa;
        font-weight: 600;
      }
      .tools {
        display: flex;
        gap: 8px;
        align-items: center;
        margin-top: 4px;
      }
      .tools button {
        border: 1px solid var(--pl-rule);
        background: #fff;
        border-radius: 3px;
        padding: 1px 8px;
        font-size: 11.5px;
      }
    `,
  ];

  static override properties = {
    caption: { type: String },
    summary: { type: String },
    columns: { attribute: false },
    rows: { attribute: false },
    _open: { state: true },
    _copied: { state: true },
  };

  /** What the table shows (also its caption). */
  declare caption: string;
  /** The disclosure's label. */
  declare summary: string;
  declare columns: readonly TableColumn[];
  /** Rows, computed only while the table is open. */
  declare rows: () => ReadonlyArray<readonly TableCell[]>;

  declare private _open: boolean;
  declare private _copied: string;

  constructor() {
    super();
    this.caption = '';
    this.summary = 'Show the numbers';
    this.columns = [];
    this.rows = () => [];
    this._open = false;
    this._copied = '';
  }

  override render() {
    const header = (c: TableColumn) => (c.unit ? `${c.label} (${c.unit})` : c.label);
    const rows = this._open ? this.rows() : [];
    return html`<details @toggle=${this.onToggle}>
      <summary>${this.summary}${this.caption ? html`<span class="sr-only">: ${this.caption}</span>` : nothing}</summary>
      ${this._open
        ? html`<div class="tools">
              <button type="button" @click=${this.onCopy}>Copy as tab-separated text</button>
              <span class="muted" role="status">${this._copied}</span>
            </div>
            <div class="wrap" tabindex="0" role="region" aria-label=${`table: ${this.caption}`}>
              <table part="table">
                <caption>
                  ${this.caption}
                </caption>
                <thead>
                  <tr>
                    ${this.columns.map((c) => html`<th scope="col">${header(c)}</th>`)}
                  </tr>
                </thead>
                <tbody>
                  ${rows.map((r) => html`<tr>${r.map((v) => html`<td class=${typeof v === 'number' ? 'num' : ''}>${cell(v)}</td>`)}</tr>`)}
                </tbody>
              </table>
            </div>`
        : nothing}
    </details>`;
  }

  private onToggle(e: Event): void {
    this._open = (e.currentTarget as HTMLDetailsElement).open;
    this._copied = '';
  }

  private async onCopy(): Promise<void> {
    const header = this.columns.map((c) => (c.unit ? `${c.label} (${c.unit})` : c.label)).join('\t');
    const body = this.rows().map((r) => r.map((v) => (typeof v === 'number' ? String(v) : (v ?? ''))).join('\t'));
    try {
      await navigator.clipboard.writeText([header, ...body].join('\n'));
      this._copied = `copied ${body.length} rows`;
    } catch {
      this._copied = 'the browser refused the clipboard; select the table and copy instead';
    }
  }
}

function cell(v: TableCell): string {
  if (typeof v === 'number') return formatValue(v, 6);
  return v ?? '—';
}

customElements.define('pl-data-table', PlDataTable);

declare global {
  interface HTMLElementTagNameMap {
    'pl-data-table': PlDataTable;
  }
}
