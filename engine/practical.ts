/**
 * Practical difference of one run from the simulation, per channel and in physical units: where
 * and by how much the run's smoothed curve leaves the simulated pointwise band, its largest
 * deviation from the simulated mean, and an equivalence check against the plan's tolerance.
 *
 * This module answers "how big, where, and does it matter in the plan's own units". It is not a
 * test: whether the run is statistically distinguishable from the simulation is the conformal
 * p-value of ./calibrate.ts, and the two answers are kept apart (`excursion` and `deviation`
 * describe; `withinTolerance` judges against the plan; neither is a p-value). A pointwise 95 % band
 * is left somewhere by far more than 5 % of null runs (37 % of the synthetic null runs in
 * test/engine/practical.test.ts; it is not simultaneous, ./envelope.ts has the simultaneous band),
 * so "leaves the band" alone is no evidence of a discrepancy.
 *
 * Method, per channel c, over the active grid points g of the judged window:
 *   band       l_g, u_g = Hyndman–Fan type-7 quantiles (α/2, 1 − α/2) of the N simulated values at g
 *              (./envelope.ts quantileSorted; Hyndman & Fan, The American Statistician
 *              50(4):361–365, 1996, doi:10.2307/2684934), α = 0.05 by default; mean m_g.
 *   excess     e_g = max(0, x_g − u_g, l_g − x_g), the distance outside the band (units).
 *   time outside and integrated excess: the run and the band edges are taken as linear between
 *              consecutive active grid points (the same piecewise-linear reading as the trapezoid
 *              rule of ./grid.ts). On a segment of length h where d = x − u (or l − x) goes from a
 *              to b, the time with d > 0 and ∫ max(d, 0) are exact for that linear d:
 *                a, b ≥ 0:  h  and  h (a + b) / 2          (the trapezoid rule)
 *                a > 0 > b: h a / (a − b)  and  h a² / (2 (a − b))   (cut at the crossing)
 *              A lone active point (no active neighbour) counts h/2, as in ./grid.ts.
 *   deviation  the largest |x_g − m_g| and its signed value and time.
 *   tolerance  withinTolerance = every active e_g ≤ tolerance, i.e. the run stays inside the band
 *              widened by the tolerance on both sides, [l − tol, u + tol]. Because the run and the
 *              edges are linear between grid points, checking the grid points checks the whole
 *              window. Undefined when the plan gives no tolerance. This is the usual "difference
 *              within an equivalence margin" reading of a practical tolerance (cf. Schuirmann,
 *              J. Pharmacokinet. Biopharm. 15:657–680, 1987, doi:10.1007/BF01068419, where the
 *              margin is set by the domain, not by the data).
 *
 * Curves hold `channels.length` blocks of M = grid.points.length values in physical units
 * (circular channels already unwrapped on the same branch for the run and the simulations, as for
 * the assessment itself).
 */
import { quantileSorted } from './envelope.js';
import type { Grid } from './grid.js';
import type { ChannelSpec } from './types.js';

/** Level of the pointwise band (0.95: the 2.5 % and 97.5 % quantiles). */
export const PRACTICAL_BAND_LEVEL = 0.95;

/** The simulated pointwise band of one channel on the grid (NaN outside the judged window). */
export interface PointwiseBand {
  readonly level: number;
  readonly lower: Float64Array;
  readonly upper: Float64Array;
  readonly mean: Float64Array;
}

/** Where and how far the run leaves the band (descriptive; all zero when it stays inside). */
export interface BandExcursion {
  /** True when the run is outside the band at some active grid point. */
  readonly leaves: boolean;
  /** Largest distance outside the band (units, ≥ 0) and the time (s) where it occurs. */
  readonly maxExcess: number;
  readonly maxExcessAt?: number;
  /** Whether that largest excursion is above the upper or below the lower edge. */
  readonly maxExcessSide?: 'above' | 'below';
  /** Time spent outside the band (s). */
  readonly timeOutside: number;
  /** ∫ excess dt over the window (units·s). */
  readonly integratedExcess: number;
}

/** The run's largest deviation from the simulated mean (signed, units) and its time (s). */
export interface MeanDeviation {
  readonly value: number;
  readonly at: number;
}

export interface ChannelDifference {
  readonly channel: number;
  readonly name: string;
  readonly unit: string;
  /** Active grid points and the length of the judged window (s, sum of trapezoid weights). */
  readonly points: number;
  readonly span: number;
  readonly band: PointwiseBand;
  /** Description of the difference (not a test; see the module comment). */
  readonly excursion: BandExcursion;
  readonly deviation: MeanDeviation;
  /** The plan's tolerance (units), when it gives one. */
  readonly tolerance?: number;
  /**
   * Equivalence against the tolerance: true when the run stays inside the band widened by the
   * tolerance; undefined when the plan gives no tolerance. A practical judgement, separate from the
   * statistical verdict (the run's conformal p-value).
   */
  readonly withinTolerance?: boolean;
  /** tolerance − maxExcess (units): room left (≥ 0) or how far beyond it the run goes (< 0). */
  readonly toleranceMargin?: number;
}

export interface PracticalOptions {
  /** Band level (default PRACTICAL_BAND_LEVEL). */
  readonly level?: number;
}

/** Time outside (d > 0) and ∫ max(d, 0) on a segment of length h where d is linear from a to b. */
function positivePart(a: number, b: number, h: number): { time: number; area: number } {
  if (a <= 0 && b <= 0) return { time: 0, area: 0 };
  if (a >= 0 && b >= 0) return { time: a > 0 || b > 0 ? h : 0, area: (h * (a + b)) / 2 };
  const top = Math.max(a, b);
  const frac = top / (Math.abs(a) + Math.abs(b));
  return { time: h * frac, area: (h * top * frac) / 2 };
}

/**
 * Practical difference of a run from its simulations, one entry per channel (see the module
 * comment). `run` and each of `sims` hold channel blocks of M grid values in physical units;
 * `active` marks the judged grid points (at least one).
 */
export function practicalDifference(
  run: Float64Array,
  active: Uint8Array,
  sims: readonly Float64Array[],
  grid: Grid,
  channels: readonly ChannelSpec[],
  options: PracticalOptions = {},
): ChannelDifference[] {
  const M = grid.points.length;
  const C = channels.length;
  const N = sims.length;
  const level = options.level ?? PRACTICAL_BAND_LEVEL;
  if (!(level > 0 && level < 1)) throw new RangeError(`practicalDifference: level must be in (0, 1), got ${level}`);
  if (N < 3) throw new RangeError(`practicalDifference: need at least 3 simulated curves, got ${N}`);
  if (active.length !== M) throw new RangeError(`practicalDifference: active mask has ${active.length} points, the grid ${M}`);
  if (run.length !== C * M) throw new RangeError(`practicalDifference: run has ${run.length} values, expected ${C} × ${M}`);
  for (const s of sims) if (s.length !== C * M) throw new RangeError(`practicalDifference: a simulated curve has ${s.length} values, expected ${C * M}`);
  let count = 0;
  for (let g = 0; g < M; g++) if (active[g]) count++;
  if (count === 0) throw new RangeError('practicalDifference: no active grid point');

  const column = new Float64Array(N);
  const out: ChannelDifference[] = [];
  for (let c = 0; c < C; c++) {
    const lower = new Float64Array(M).fill(Number.NaN);
    const upper = new Float64Array(M).fill(Number.NaN);
    const mean = new Float64Array(M).fill(Number.NaN);
    for (let g = 0; g < M; g++) {
      if (!active[g]) continue;
      let m = 0;
      for (let i = 0; i < N; i++) {
        column[i] = sims[i][c * M + g];
        m += column[i];
      }
      column.sort();
      lower[g] = quantileSorted(column, (1 - level) / 2);
      upper[g] = quantileSorted(column, 1 - (1 - level) / 2);
      mean[g] = m / N;
    }
    const x = (g: number): number => run[c * M + g];
    const above = (g: number): number => x(g) - upper[g];
    const below = (g: number): number => lower[g] - x(g);

    let maxExcess = 0;
    let maxExcessAt: number | undefined;
    let maxExcessSide: 'above' | 'below' | undefined;
    let dev = 0;
    let devAt = Number.NaN;
    let timeOutside = 0;
    let integratedExcess = 0;
    let span = 0;
    for (let g = 0; g < M; g++) {
      if (!active[g]) continue;
      const up = above(g);
      const down = below(g);
      if (up > maxExcess) [maxExcess, maxExcessAt, maxExcessSide] = [up, grid.points[g], 'above'];
      if (down > maxExcess) [maxExcess, maxExcessAt, maxExcessSide] = [down, grid.points[g], 'below'];
      const d = x(g) - mean[g];
      if (Number.isNaN(devAt) || Math.abs(d) > Math.abs(dev)) [dev, devAt] = [d, grid.points[g]];
      const next = g + 1 < M && active[g + 1];
      const prev = g > 0 && active[g - 1];
      if (next) {
        const h = grid.points[g + 1] - grid.points[g];
        const a = positivePart(up, above(g + 1), h);
        const b = positivePart(down, below(g + 1), h);
        timeOutside += a.time + b.time;
        integratedExcess += a.area + b.area;
        span += h;
      } else if (!prev) {
        // A lone active point: weight h/2 (./grid.ts).
        const h = grid.step / 2;
        const e = Math.max(up, down, 0);
        if (e > 0) timeOutside += h;
        integratedExcess += h * e;
        span += h;
      }
    }
    const tolerance = channels[c].tolerance;
    const withinTolerance = tolerance === undefined ? undefined : maxExcess <= tolerance;
    out.push({
      channel: c,
      name: channels[c].name,
      unit: channels[c].unit,
      points: count,
      span,
      band: { level, lower, upper, mean },
      excursion: { leaves: maxExcess > 0, maxExcess, maxExcessAt, maxExcessSide, timeOutside, integratedExcess },
      deviation: { value: dev, at: devAt },
      tolerance,
      withinTolerance,
      toleranceMargin: tolerance === undefined ? undefined : tolerance - maxExcess,
    });
  }
  return out;
}
