/**
 * The common evaluation grid over [0, horizon] and its L2 quadrature weights, and the observation
 * window of a track: the part of [0, horizon] its samples actually cover.
 *
 * Quadrature: composite trapezoid rule on each run of consecutive active grid points (weights h/2
 * at the ends of a run, h inside), so that Σ w f² approximates ∫ f² over the observed span only.
 * A single isolated active point gets weight h/2 (common practice for a trapezoid rule).
 */
export interface Grid {
  readonly horizon: number;
  readonly points: Float64Array;
  readonly step: number;
}

export function uniformGrid(horizon: number, size: number): Grid {
  if (!(horizon > 0)) throw new RangeError(`uniformGrid: horizon must be positive, got ${horizon}`);
  if (!Number.isInteger(size) || size < 2) throw new RangeError(`uniformGrid: size must be an integer >= 2, got ${size}`);
  const step = horizon / (size - 1);
  const points = new Float64Array(size);
  for (let i = 0; i < size; i++) points[i] = i * step;
  points[size - 1] = horizon;
  return { horizon, points, step };
}

/** Observed part of [0, horizon]: disjoint closed intervals in increasing order. */
export interface TrackWindow {
  readonly intervals: ReadonlyArray<readonly [number, number]>;
  /** First and last sample time. */
  readonly span: readonly [number, number];
  /** The intervals between samples that are dropouts (longer than the gap threshold). */
  readonly gaps: ReadonlyArray<readonly [number, number]>;
  /** True when the track starts late or ends early relative to [0, horizon]. */
  readonly partial: boolean;
  /** True when the window is all of [0, horizon] without gaps (the baseline's own window). */
  readonly full: boolean;
  /** The median sampling interval, the nominal rate the gap threshold is built on. */
  readonly nominalInterval: number;
}

function median(values: Float64Array): number {
  if (values.length === 0) return Number.NaN;
  const s = Float64Array.from(values).sort();
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}

/**
 * The observation window of sorted sample times.
 *
 * A gap between consecutive samples is a dropout when it is longer than `gapFactor` × the median
 * sampling interval and longer than two grid steps (shorter holes are bridged by the smoother and
 * never hide a grid point's worth of track). The track is partial when its first sample is later,
 * or its last sample earlier, than `edge` = max(3 × median interval, one grid step) from the ends
 * of [0, horizon].
 */
export function observedWindow(t: Float64Array, horizon: number, gapFactor: number, gridStep: number): TrackWindow {
  if (t.length === 0) {
    return { intervals: [], span: [0, 0], gaps: [], partial: true, full: false, nominalInterval: Number.NaN };
  }
  const n = t.length;
  const dt = new Float64Array(Math.max(0, n - 1));
  for (let i = 1; i < n; i++) dt[i - 1] = t[i] - t[i - 1];
  const nominal = n > 1 ? median(dt) : Number.NaN;
  const threshold = Math.max(gapFactor * (Number.isFinite(nominal) ? nominal : 0), 2 * gridStep);
  const intervals: Array<[number, number]> = [];
  const gaps: Array<[number, number]> = [];
  let start = t[0];
  for (let i = 1; i < n; i++) {
    if (dt[i - 1] > threshold) {
      intervals.push([start, t[i - 1]]);
      gaps.push([t[i - 1], t[i]]);
      start = t[i];
    }
  }
  intervals.push([start, t[n - 1]]);
  const edge = Math.max(3 * (Number.isFinite(nominal) ? nominal : 0), gridStep);
  const partial = t[0] > edge || t[n - 1] < horizon - edge;
  const full = !partial && gaps.length === 0;
  if (full) {
    return { intervals: [[0, horizon]], span: [t[0], t[n - 1]], gaps, partial, full, nominalInterval: nominal };
  }
  // A complete track with a dropout still counts as covering the ends of the horizon.
  if (!partial) {
    intervals[0][0] = 0;
    intervals[intervals.length - 1][1] = horizon;
  }
  return { intervals, span: [t[0], t[n - 1]], gaps, partial, full, nominalInterval: nominal };
}

/** The window of the baseline itself: all of [0, horizon]. */
export function fullWindow(horizon: number): TrackWindow {
  return { intervals: [[0, horizon]], span: [0, horizon], gaps: [], partial: false, full: true, nominalInterval: Number.NaN };
}

/** A key that identifies a window (for caching per-window baseline fits). */
export function windowKey(w: TrackWindow): string {
  return w.intervals.map(([a, b]) => `${a.toFixed(3)}-${b.toFixed(3)}`).join(',');
}

/** Trapezoid weights of the grid restricted to the window (0 outside it). */
export function windowWeights(grid: Grid, window: TrackWindow): Float64Array {
  const n = grid.points.length;
  const active = new Uint8Array(n);
  for (const [a, b] of window.intervals) {
    for (let i = 0; i < n; i++) {
      const s = grid.points[i];
      if (s >= a - 1e-9 && s <= b + 1e-9) active[i] = 1;
    }
  }
  const w = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    if (!active[i]) continue;
    const left = i > 0 && active[i - 1];
    const right = i + 1 < n && active[i + 1];
    w[i] = ((left ? 1 : 0) + (right ? 1 : 0)) * (grid.step / 2);
    if (!left && !right) w[i] = grid.step / 2;
  }
  return w;
}

/** True when sample time s lies in one of the window's intervals. */
export function inWindow(window: TrackWindow, s: number): boolean {
  for (const [a, b] of window.intervals) if (s >= a && s <= b) return true;
  return false;
}

/** Does a track with sample times t cover the window (first/last samples within `edge`)? */
export function covers(t: Float64Array, window: TrackWindow, edge: number): boolean {
  if (t.length === 0) return false;
  const a = window.intervals[0]?.[0] ?? 0;
  const b = window.intervals[window.intervals.length - 1]?.[1] ?? 0;
  return t[0] <= a + edge && t[t.length - 1] >= b - edge;
}
