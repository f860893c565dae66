/**
 * plumbline's colours, one home for the live dashboard (dashboard/src/theme.ts) and the debrief's
 * charts and page (ingest/debrief/): a colour-blind-safe palette (Okabe & Ito, "Color Universal
 * Design", 2008) plus neutrals. Plain constants with no DOM or lit, so Node code can use them.
 * Colour is never the only cue: each status also has a shape and a word.
 */
export const PALETTE = {
  ink: '#1b2330',
  muted: '#566070',
  faint: '#8a93a3',
  rule: '#d9dde4',
  panel: '#ffffff',
  page: '#eef0f3',
  /** Light grid lines and table heads on white paper. */
  grid: '#e3e6eb',
  /** Simulation: bands, mean, cloud. */
  sim: '#0072B2',
  simDark: '#0b3a5c',
  band99: '#dcebf6',
  band90: '#b9d6ec',
  band50: '#8dbde0',
  simultaneous: '#8c3f73',
  texture: '#9aa5b4',
  /** The live run. */
  live: '#D55E00',
  raw: '#1b2330',
  projection: '#E69F00',
  /** The judged part of a run's window, shaded behind a chart. */
  judged: '#f3efe2',
  /** Status hues (always with a shape and a word). */
  low: '#D55E00',
  high: '#0072B2',
  ok: '#009E73',
  busy: '#B07800',
  alpha: '#CC79A7',
  /**
   * The status hues darkened for text: each reaches WCAG 2.1 AA contrast (4.5:1) on every panel
   * background of the page (white, #eef0f3, #fff4d6 selected, #f7f8fa); the hues above stay for
   * chart strokes and marks. Ratios (WCAG relative luminance) on white / on #eef0f3:
   * lowText 6.05 / 5.30, highText 6.85 / 6.00, okText 6.53 / 5.72, busyText 6.85 / 6.00.
   */
  lowText: '#a64500',
  highText: '#005f94',
  okText: '#006b4f',
  busyText: '#7a5300',
} as const;
