/**
 * The visual language: one colour-blind-safe palette (Okabe & Ito, "Color Universal Design", 2008;
 * its one home is ingest/palette.ts) and the styles every panel shares. Colour is never the only cue: each status also has a shape and
 * a word (see `status-*` classes and the markers in the charts).
 */
import { css, unsafeCSS } from 'lit';
import { PALETTE } from '../../ingest/palette.js';

/** The palette (ingest/palette.ts), shared with the debrief's charts and page. */
export const COLORS = PALETTE;

/** Constants of our own (never text from outside) go into CSS through unsafeCSS. */
/** Monospace digits for aligned numbers; the system stacks only (nothing is downloaded). */
export const FONT = `system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", "Liberation Sans", Arial, sans-serif`;
export const MONO = `ui-monospace, "SFMono-Regular", "DejaVu Sans Mono", "Liberation Mono", Menlo, Consolas, monospace`;

export const shared = css`
  :host {
    box-sizing: border-box;
    color: ${unsafeCSS(COLORS.ink)};
    font-family: ${unsafeCSS(FONT)};
    font-size: 13px;
    line-height: 1.4;
  }
  *,
  *::before,
  *::after {
    box-sizing: inherit;
  }
  h2 {
    font-size: 12px;
    font-weight: 650;
    letter-spacing: 0.06em;
    text-transform: uppercase;
    color: var(--pl-muted);
    margin: 0;
  }
  .num {
    font-family: ${unsafeCSS(MONO)};
    font-variant-numeric: tabular-nums;
  }
  .muted {
    color: var(--pl-muted);
  }
  .sr-only {
    position: absolute;
    width: 1px;
    height: 1px;
    padding: 0;
    margin: -1px;
    overflow: hidden;
    clip: rect(0, 0, 0, 0);
    white-space: nowrap;
    border: 0;
  }
  :focus-visible {
    outline: 3px solid var(--pl-focus);
    outline-offset: 1px;
  }
  button {
    font: inherit;
    color: inherit;
    cursor: pointer;
  }
  .caption {
    color: var(--pl-muted);
    font-size: 11.5px;
    margin: 4px 0 0;
  }
  /* p-values: final is filled and upright, provisional hollow, italic and says so. */
  .p {
    display: inline-flex;
    align-items: baseline;
    gap: 4px;
    white-space: nowrap;
  }
  .p .mark {
    font-style: normal;
    font-size: 11px;
  }
  .p.low {
    color: var(--pl-low);
  }
  .p.high {
    color: var(--pl-high);
  }
  .p.final .value {
    font-weight: 700;
  }
  .p.provisional .value {
    font-style: italic;
    font-weight: 400;
  }
  .p .word {
    font-size: 11px;
    font-style: italic;
    color: var(--pl-muted);
  }
  .chip {
    display: inline-block;
    border: 1px solid var(--pl-rule);
    border-radius: 3px;
    padding: 0 5px;
    font-size: 11px;
    line-height: 17px;
    white-space: nowrap;
    background: #f7f8fa;
  }
  .chip.flag {
    border-color: #e3b891;
    background: #fdf3ea;
    color: #7a3500;
  }
  /* A small progress bar: the filled span's width is the fraction done. */
  .bar {
    display: inline-block;
    width: var(--pl-bar-width, 44px);
    height: var(--pl-bar-height, 5px);
    border: 1px solid currentColor;
    border-radius: 2px;
    vertical-align: middle;
    margin-left: 4px;
    overflow: hidden;
  }
  .bar > span {
    display: block;
    height: 100%;
    background: currentColor;
  }
  .chip.ok {
    border-color: #9fc3dd;
    background: #eef5fa;
    color: #174a6e;
  }
`;

/** Custom properties for the whole page (set on pl-app's host; inherited through shadow roots). */
export const pageVars = css`
  :host {
    --pl-ink: ${unsafeCSS(COLORS.ink)};
    --pl-muted: ${unsafeCSS(COLORS.muted)};
    --pl-rule: ${unsafeCSS(COLORS.rule)};
    --pl-panel: ${unsafeCSS(COLORS.panel)};
    --pl-page: ${unsafeCSS(COLORS.page)};
    --pl-low: ${unsafeCSS(COLORS.lowText)};
    --pl-high: ${unsafeCSS(COLORS.highText)};
    --pl-ok: ${unsafeCSS(COLORS.okText)};
    --pl-busy: ${unsafeCSS(COLORS.busyText)};
    --pl-focus: #1f6feb;
    --pl-selected: #fff4d6;
  }
`;
