/**
 * Registration of one curve to a target curve on the common grid: the time shift, and the smooth
 * monotone time warp, that best align them; how large the result is, where the lag builds up, and
 * a distribution-free interval for it.
 *
 * Setting. Curves are channel blocks of M values on a uniform grid t_0 < … < t_{M−1} (step Δt),
 * linear between grid points, and defined only on the judged window (grid weights w_g > 0). A warp
 * h maps the target's clock to the curve's: the curve at time h(s) is compared with the target at
 * time s. The lag is δ(s) = h(s) − s; δ > 0: the curve is late (it does at s + δ what the target does
 * at s). The criterion is the weighted mean squared distance over the judged grid points whose warped
 * time still lies in the judged window,
 *   D(h) = Σ_g Σ_c ω_{cg} (x_c(h(t_g)) − m_c(t_g))² / Σ_g w_g   (sums over those points),
 * with ω_{cg} = w_g / s_c² the joined weights of the model (each channel in its own scale). At least
 * half of the window's weight must remain compared, otherwise the warp is not admissible.
 * (Least-squares registration of a curve to a template, Ramsay & Silverman, "Functional Data
 * Analysis", 2nd ed., Springer 2005, doi:10.1007/b98888: shift registration and continuous
 * registration by a monotone warping function, in the registration chapter (ch. 7; chapter and
 * section numbers quoted from memory).)
 *
 * Shift: h(s) = s + τ, τ in [−span, span]. D is evaluated on a lattice of step Δt/4 (coarse to
 * fine, see `registerShift`), then one parabolic step through the best lattice point and its
 * neighbours (clamped to half a lattice step).
 *
 * Warp: h(s) = s + δ(s) with δ piecewise linear in s between K + 1 equally spaced knots over the
 * judged span (first to last judged grid point; K = WARP_SEGMENTS), so that a lag that builds up in
 * one phase of the run and then stays is described with K + 1 numbers. The criterion is penalised,
 * D(h) + λ Σ_j ((δ_{j+1} − δ_j)/span)², a roughness penalty on the warp as in Ramsay & Silverman's
 * continuous registration, here on the first differences of the lags so that the warp departs from
 * a constant shift only where the curves ask for it (in a stretch without timing landmarks the lag
 * stays put instead of fitting the curve's own variation). Constraints: |δ_j| ≤ span at every knot, and the slope of h on every segment, 1 + (δ_{j+1} − δ_j)/(s_{j+1} − s_j), within
 * [MIN_SLOPE, 1/MIN_SLOPE], so h is strictly increasing (a monotone warp: time never runs
 * backwards) and neither clock runs more than 1/MIN_SLOPE times faster than the other. The knots are
 * fitted by compass search (coordinate moves ±Δ on one knot at a time, a move kept when it lowers
 * the penalised criterion and keeps the constraints; Δ halved when no move helps; stop when Δ < Δt/8), the direct-search
 * method of Hooke & Jeeves (J. ACM 8(2):212–229, 1961, doi:10.1145/321062.321069; convergence
 * analysis in Kolda, Lewis & Torczon, SIAM Review 45(3):385–482, 2003,
 * doi:10.1137/S003614450242889). It needs no derivative of D, which jumps where a grid point leaves
 * the compared set. Search from the best shift and, when that is at least a grid step away, from
 * δ = 0; the lower criterion wins. At most WARP_MAX_SWEEPS sweeps over the knots (the loop is
 * bounded; `converged` says whether Δ reached its floor first). A move of one knot changes only the two segments next to it, so each trial costs
 * O(C · M/K).
 *
 * Size and place: the lag at the end of the window, δ(s*) with s* = min(b, h⁻¹(b)) and b the last
 * judged grid point (the lag of the curve's last judged moment; a late curve's end is where the
 * target was at b − δ(s*)); and where the lag builds up: the times (on the curve's clock, u = h(s))
 * at which the lag, on its way from its value at the window start a to that end value, first covers
 * 10 % and 90 % of the change (a first passage, so that small wiggles of the lag do not move it; for
 * a constant lag both are h(a): the lag was there from the start).
 *
 * Interval: `predictionInterval` inverts the rank of the estimate's error among reference errors —
 * the same registration of curves for which the true value is 0 (the simulated curves registered to
 * the same target: their estimates are their natural timing deviations). If the curve's error
 * τ̂ − τ is exchangeable with those N errors, [τ̂ − e_(k_hi), τ̂ − e_(k_lo)] with
 * k_lo = ⌊(N + 1) α/2⌋ and k_hi = ⌈(N + 1)(1 − α/2)⌉ covers τ with probability ≥ 1 − α
 * (split-conformal prediction interval: Vovk, Gammerman & Shafer, "Algorithmic Learning in a Random
 * World", Springer 2005, doi:10.1007/b106715; Lei, G'Sell, Rinaldo, Tibshirani & Wasserman, JASA
 * 113:1094–1111, 2018, doi:10.1080/01621459.2017.1307307; volume and pages quoted from memory). An
 * order statistic outside 1..N gives an infinite end. The interval is for the lag beyond the natural
 * timing scatter of one curve as the reference curves show it; a curve made under conditions that
 * scatter more (a slower manoeuvre accumulates more timing noise) gets too narrow an interval.
 */
import type { Grid } from './grid.js';

/** Segments of the piecewise-linear lag (knots − 1). */
export const WARP_SEGMENTS = 6;
/** Smallest slope of the warp h on a segment; the largest is its reciprocal. */
export const MIN_SLOPE = 0.25;
/** Upper bound on the sweeps of the compass search. */
export const WARP_MAX_SWEEPS = 200;
/** Sub-steps of the shift lattice per grid step. */
const SUBSTEPS = 4;
const EPS = 1e-9;

/** The target of a registration and how distances are weighted. */
export interface RegistrationTarget {
  /** Target curve, C channel blocks of M grid values. */
  readonly target: Float64Array;
  /** Grid weights of the judged window (0 outside it), length M. */
  readonly window: Float64Array;
  /** Joined weights w_g / s_c², channel blocks, length C · M. */
  readonly joined: Float64Array;
  readonly grid: Grid;
  /** Largest |lag| searched, seconds. */
  readonly span: number;
  /**
   * λ of the warp's roughness penalty λ Σ_j ((δ_{j+1} − δ_j)/span)² (default 0), in the units of D;
   * e.g. the median D(0) of reference curves.
   */
  readonly roughness?: number;
}

export interface ShiftFit {
  /** τ̂, seconds (> 0: the curve is late). */
  readonly shift: number;
  /** τ̂ lies on the edge of the lattice. */
  readonly atLimit: boolean;
  /** D(τ̂) / D(0) on the same grid points. */
  readonly ratio: number;
}

export interface WarpFit {
  /** Knot times s_j on the target's clock, increasing. */
  readonly knots: Float64Array;
  /** Lags δ_j at the knots, seconds. */
  readonly lags: Float64Array;
  /** D(ĥ) / D(0), D(0) on the same compared points. */
  readonly ratio: number;
  /** D(ĥ) (mean over the compared points) and D(0) over all judged points. */
  readonly distance: number;
  readonly distance0: number;
  /** Some knot lies on ±span. */
  readonly atLimit: boolean;
  /** The search step reached its floor within WARP_MAX_SWEEPS. */
  readonly converged: boolean;
}

/** Value of the curve at time u (linear between judged grid points), or NaN outside the window. */
function readAt(curve: Float64Array, window: Float64Array, grid: Grid, c: number, u: number): number {
  const M = window.length;
  const p = (u - grid.points[0]) / grid.step;
  const i = Math.floor(p + EPS);
  const f = Math.max(0, p - i);
  if (i < 0 || i >= M || !(window[i] > 0)) return Number.NaN;
  if (f <= EPS) return curve[c * M + i];
  if (i + 1 >= M || !(window[i + 1] > 0)) return Number.NaN;
  return (1 - f) * curve[c * M + i] + f * curve[c * M + i + 1];
}

/**
 * Contribution of grid point g when the curve is read at time u: Σ_c ω_{cg}(x_c(u) − m_c(t_g))², or
 * NaN when u lies outside the judged window.
 */
function pointCost(curve: Float64Array, t: RegistrationTarget, g: number, u: number): number {
  const { window } = t;
  const M = window.length;
  const C = curve.length / M;
  const p = (u - t.grid.points[0]) / t.grid.step;
  const i = Math.floor(p + EPS);
  const f = Math.max(0, p - i);
  if (i < 0 || i >= M || !(window[i] > 0)) return Number.NaN;
  const between = f > EPS;
  if (between && (i + 1 >= M || !(window[i + 1] > 0))) return Number.NaN;
  let acc = 0;
  for (let c = 0, d = 0; c < C; c++, d += M) {
    const x = between ? (1 - f) * curve[d + i] + f * curve[d + i + 1] : curve[d + i];
    const e = x - t.target[d + g];
    acc += t.joined[d + g] * e * e;
  }
  return acc;
}

function checkShapes(curve: Float64Array, t: RegistrationTarget): void {
  const M = t.window.length;
  if (M !== t.grid.points.length || curve.length % M !== 0 || curve.length === 0 || t.target.length !== curve.length || t.joined.length !== curve.length) {
    throw new RangeError(`registration: curve of ${curve.length}, target of ${t.target.length}, joined weights of ${t.joined.length} values for a grid of ${t.grid.points.length} and ${M} window weights`);
  }
  if (!(t.span >= 0) || !Number.isFinite(t.span)) throw new RangeError(`registration: span must be a finite number >= 0, got ${t.span}`);
}

/**
 * D for a constant lag, or NaN when less than half of the window stays compared; with `withZero`
 * also D(0) on the same points.
 */
function shiftDistance(curve: Float64Array, t: RegistrationTarget, tau: number, withZero = false): { d: number; d0: number } {
  const M = t.window.length;
  let total = 0;
  let used = 0;
  let acc = 0;
  let acc0 = 0;
  for (let g = 0; g < M; g++) {
    if (!(t.window[g] > 0)) continue;
    total += t.window[g];
    const cost = pointCost(curve, t, g, t.grid.points[g] + tau);
    if (Number.isNaN(cost)) continue;
    acc += cost;
    if (withZero) acc0 += pointCost(curve, t, g, t.grid.points[g]);
    used += t.window[g];
  }
  return used > 0 && used >= 0.5 * total ? { d: acc / used, d0: acc0 / used } : { d: Number.NaN, d0: Number.NaN };
}

/**
 * Shift registration (see the module comment). The lattice of step Δt/4 is searched coarse to
 * fine: every fourth point (step Δt) first, then the fine points within one coarse step of the
 * best coarse point (D is smooth at the scale of the grid step, the curves being P-spline fits
 * evaluated on it).
 */
export function registerShift(curve: Float64Array, t: RegistrationTarget): ShiftFit {
  checkShapes(curve, t);
  const delta = t.grid.step / SUBSTEPS;
  const J = Math.floor(t.span / delta + EPS);
  const values = new Float64Array(2 * J + 1).fill(Number.NaN);
  const done = new Uint8Array(2 * J + 1);
  const at = (j: number): number => {
    if (j < 0 || j > 2 * J) return Number.NaN;
    if (!done[j]) {
      values[j] = shiftDistance(curve, t, (j - J) * delta).d;
      done[j] = 1;
    }
    return values[j];
  };
  let best = -1;
  const consider = (j: number): void => {
    const v = at(j);
    if (!Number.isNaN(v) && (best < 0 || v < values[best])) best = j;
  };
  // Coarse pass through τ = 0 (j = J) every SUBSTEPS lattice points, and both ends.
  for (let j = J % SUBSTEPS; j <= 2 * J; j += SUBSTEPS) consider(j);
  consider(0);
  consider(2 * J);
  if (best < 0) for (let j = 0; j <= 2 * J; j++) consider(j);
  if (best < 0) return { shift: 0, atLimit: false, ratio: 1 };
  const coarse = best;
  for (let j = Math.max(0, coarse - SUBSTEPS + 1); j <= Math.min(2 * J, coarse + SUBSTEPS - 1); j++) consider(j);
  let shift = (best - J) * delta;
  const lo = at(best - 1);
  const hi = at(best + 1);
  const curvature = lo - 2 * values[best] + hi;
  if (curvature > 0) shift -= Math.max(-0.5, Math.min(0.5, (hi - lo) / (2 * curvature))) * delta;
  let { d, d0 } = shiftDistance(curve, t, shift, true);
  if (Number.isNaN(d)) {
    shift = (best - J) * delta;
    ({ d, d0 } = shiftDistance(curve, t, shift, true));
  }
  return { shift, atLimit: J > 0 && (best === 0 || best === 2 * J), ratio: d0 > 0 ? d / d0 : 1 };
}

/** First and last judged grid index, or [-1, -1]. */
function judgedSpan(window: Float64Array): [number, number] {
  let a = -1;
  let b = -1;
  for (let g = 0; g < window.length; g++) {
    if (window[g] > 0) {
      if (a < 0) a = g;
      b = g;
    }
  }
  return [a, b];
}

/** δ(s) of a piecewise-linear lag (constant beyond the end knots). */
export function lagAt(fit: Pick<WarpFit, 'knots' | 'lags'>, s: number): number {
  const { knots, lags } = fit;
  const K = knots.length - 1;
  if (K <= 0 || s <= knots[0]) return lags[0];
  if (s >= knots[K]) return lags[K];
  let j = 0;
  while (j < K - 1 && s > knots[j + 1]) j++;
  const f = (s - knots[j]) / (knots[j + 1] - knots[j]);
  return (1 - f) * lags[j] + f * lags[j + 1];
}

/**
 * Monotone warp registration (see the module comment). `start` is an extra starting lag (e.g. the
 * best shift); the search also starts from δ = 0.
 */
export function registerWarp(curve: Float64Array, t: RegistrationTarget, start = 0): WarpFit {
  checkShapes(curve, t);
  const M = t.window.length;
  const [ga, gb] = judgedSpan(t.window);
  const K = WARP_SEGMENTS;
  const knots = new Float64Array(K + 1);
  const a = ga >= 0 ? t.grid.points[ga] : 0;
  const b = gb >= 0 ? t.grid.points[gb] : 0;
  for (let j = 0; j <= K; j++) knots[j] = a + ((b - a) * j) / K;
  if (ga < 0 || gb <= ga) return { knots, lags: new Float64Array(K + 1), ratio: 1, distance: Number.NaN, distance0: Number.NaN, atLimit: false, converged: true };

  // Grid points of each segment (a point on a knot belongs to the segment on its right, the last
  // knot to the last segment).
  const segOf = new Int32Array(M).fill(-1);
  const frac = new Float64Array(M);
  let total = 0;
  for (let g = ga; g <= gb; g++) {
    if (!(t.window[g] > 0)) continue;
    total += t.window[g];
    const x = ((t.grid.points[g] - a) / (b - a)) * K;
    const j = Math.min(K - 1, Math.max(0, Math.floor(x + EPS)));
    segOf[g] = j;
    frac[g] = Math.min(1, Math.max(0, x - j));
  }
  // Grid index range of each segment (segOf is non-decreasing over the judged points).
  const segFirst = new Int32Array(K).fill(M);
  const segLast = new Int32Array(K).fill(-1);
  for (let g = ga; g <= gb; g++) {
    const j = segOf[g];
    if (j < 0) continue;
    segFirst[j] = Math.min(segFirst[j], g);
    segLast[j] = Math.max(segLast[j], g);
  }
  const rangeOf = (j0: number, j1: number): [number, number] => {
    let lo = M;
    let hi = -1;
    for (let j = j0; j <= j1; j++) {
      lo = Math.min(lo, segFirst[j]);
      hi = Math.max(hi, segLast[j]);
    }
    return [lo, hi];
  };
  const base = new Float64Array(M);
  for (let g = 0; g < M; g++) if (segOf[g] >= 0) base[g] = pointCost(curve, t, g, t.grid.points[g]);
  const segLength = (b - a) / K;
  const lambda = t.roughness ?? 0;
  const spanScale = t.span > 0 ? t.span : 1;
  const slopeOk = (lo: number, hi: number): boolean => {
    const slope = 1 + (hi - lo) / segLength;
    return slope >= MIN_SLOPE - EPS && slope <= 1 / MIN_SLOPE + EPS;
  };

  /** Per-point cost and used weight under lags `d`, for the points of segments j0..j1. */
  const cost = new Float64Array(M);
  const usedW = new Float64Array(M);
  const evalSegments = (d: Float64Array, j0: number, j1: number, outCost: Float64Array, outUsed: Float64Array): void => {
    const [lo, hi] = rangeOf(j0, j1);
    for (let g = lo; g <= hi; g++) {
      const j = segOf[g];
      if (j < 0) continue;
      const lag = (1 - frac[g]) * d[j] + frac[g] * d[j + 1];
      const v = pointCost(curve, t, g, t.grid.points[g] + lag);
      if (Number.isNaN(v)) {
        outCost[g] = 0;
        outUsed[g] = 0;
      } else {
        outCost[g] = v;
        outUsed[g] = t.window[g];
      }
    }
  };

  const search = (init: number): { lags: Float64Array; d: number; converged: boolean } => {
    const d = new Float64Array(K + 1).fill(Math.max(-t.span, Math.min(t.span, init)));
    evalSegments(d, 0, K - 1, cost, usedW);
    let sumCost = 0;
    let sumUsed = 0;
    for (let g = ga; g <= gb; g++) {
      sumCost += cost[g];
      sumUsed += usedW[g];
    }
    const penalty = (): number => {
      if (!(lambda > 0)) return 0;
      let p = 0;
      for (let j = 0; j < K; j++) p += ((d[j + 1] - d[j]) / spanScale) ** 2;
      return lambda * p;
    };
    const value = (sc: number, su: number): number => (su > 0 && su >= 0.5 * total - EPS ? sc / su + penalty() : Number.POSITIVE_INFINITY);
    let current = value(sumCost, sumUsed);
    let step = Math.max(t.span / 4, t.grid.step);
    const floor = t.grid.step / 8;
    const trialCost = new Float64Array(M);
    const trialUsed = new Float64Array(M);
    let converged = false;
    for (let sweep = 0; sweep < WARP_MAX_SWEEPS; sweep++) {
      let improved = false;
      for (let j = 0; j <= K; j++) {
        for (const sign of [1, -1]) {
          const v = d[j] + sign * step;
          if (Math.abs(v) > t.span + EPS) continue;
          if (j > 0 && !slopeOk(d[j - 1], v)) continue;
          if (j < K && !slopeOk(v, d[j + 1])) continue;
          const old = d[j];
          d[j] = v;
          const j0 = Math.max(0, j - 1);
          const j1 = Math.min(K - 1, j);
          evalSegments(d, j0, j1, trialCost, trialUsed);
          const [lo, hi] = rangeOf(j0, j1);
          let dc = 0;
          let du = 0;
          for (let g = lo; g <= hi; g++) {
            if (segOf[g] < 0) continue;
            dc += trialCost[g] - cost[g];
            du += trialUsed[g] - usedW[g];
          }
          const next = value(sumCost + dc, sumUsed + du);
          if (next < current - 1e-12 * Math.abs(current)) {
            current = next;
            sumCost += dc;
            sumUsed += du;
            for (let g = lo; g <= hi; g++) {
              if (segOf[g] < 0) continue;
              cost[g] = trialCost[g];
              usedW[g] = trialUsed[g];
            }
            improved = true;
            break;
          }
          d[j] = old;
        }
      }
      if (!improved) {
        step /= 2;
        if (step < floor) {
          converged = true;
          break;
        }
      }
    }
    return { lags: d, d: current, converged };
  };

  const fromShift = search(start);
  const fromZero = Math.abs(start) >= t.grid.step ? search(0) : fromShift;
  const best = fromZero.d < fromShift.d ? fromZero : fromShift;
  // D(0) on the points compared under the fitted warp, as for the shift.
  let d0 = 0;
  let used = 0;
  let dh = 0;
  for (let g = ga; g <= gb; g++) {
    const j = segOf[g];
    if (j < 0) continue;
    const lag = (1 - frac[g]) * best.lags[j] + frac[g] * best.lags[j + 1];
    const v = pointCost(curve, t, g, t.grid.points[g] + lag);
    if (Number.isNaN(v)) continue;
    dh += v;
    d0 += base[g];
    used += t.window[g];
  }
  const ratio = Number.isFinite(best.d) && d0 > 0 && used > 0 ? dh / d0 : 1;
  let all0 = 0;
  for (let g = ga; g <= gb; g++) if (segOf[g] >= 0) all0 += base[g];
  let atLimit = false;
  for (const v of best.lags) if (Math.abs(v) >= t.span - 1e-6) atLimit = true;
  return { knots, lags: best.lags, ratio, distance: used > 0 ? dh / used : Number.NaN, distance0: all0 / total, atLimit, converged: best.converged };
}

/**
 * The curve read at h(t_g) on the judged grid points where that time lies in the window (other
 * points keep `fill`), and the trapezoid weights of those points (./grid.ts rule on each run of
 * consecutive points).
 */
export function warpedCurve(curve: Float64Array, fill: Float64Array, window: Float64Array, grid: Grid, lag: (s: number) => number): { curve: Float64Array; weights: Float64Array } {
  const M = window.length;
  const C = curve.length / M;
  const mask = new Uint8Array(M);
  const out = Float64Array.from(fill);
  for (let g = 0; g < M; g++) {
    if (!(window[g] > 0)) continue;
    const u = grid.points[g] + lag(grid.points[g]);
    const values = new Float64Array(C);
    let ok = true;
    for (let c = 0; c < C && ok; c++) {
      values[c] = readAt(curve, window, grid, c, u);
      ok = !Number.isNaN(values[c]);
    }
    if (!ok) continue;
    mask[g] = 1;
    for (let c = 0; c < C; c++) out[c * M + g] = values[c];
  }
  const weights = new Float64Array(M);
  for (let g = 0; g < M; g++) {
    if (!mask[g]) continue;
    const left = g > 0 && mask[g - 1] === 1;
    const right = g + 1 < M && mask[g + 1] === 1;
    weights[g] = left || right ? ((left ? 1 : 0) + (right ? 1 : 0)) * (grid.step / 2) : grid.step / 2;
  }
  return { curve: out, weights };
}

/** s* = min(b, h⁻¹(b)) for the last knot b: the target time matched to the curve's last moment. */
function endTime(fit: Pick<WarpFit, 'knots' | 'lags'>): number {
  const { knots, lags } = fit;
  const K = knots.length - 1;
  const b = knots[K];
  if (b + lags[K] <= b) return b;
  // h is increasing: find the segment where h crosses b.
  for (let j = 0; j < K; j++) {
    const h0 = knots[j] + lags[j];
    const h1 = knots[j + 1] + lags[j + 1];
    if (h1 >= b) {
      if (h0 >= b) return knots[j];
      return knots[j] + ((b - h0) / (h1 - h0)) * (knots[j + 1] - knots[j]);
    }
  }
  return b;
}

/** The lag at the end of the window, δ(s*) (see the module comment). */
export function lagAtEnd(fit: Pick<WarpFit, 'knots' | 'lags'>): number {
  return lagAt(fit, endTime(fit));
}

/** The largest |δ| over the compared part [a, s*]. */
export function largestLag(fit: Pick<WarpFit, 'knots' | 'lags'>): number {
  const end = endTime(fit);
  let m = Math.abs(lagAt(fit, end));
  for (let j = 0; j < fit.knots.length && fit.knots[j] <= end; j++) m = Math.max(m, Math.abs(fit.lags[j]));
  return m;
}

/**
 * Where the lag builds up: the curve-clock times u = h(s) at which the lag, on its way from its value
 * at the window start δ(a) to its end value δ(s*), first covers `lo` and `hi` (default 10 %, 90 %)
 * of that change, with s in [a, s*] (see the module comment). For a constant lag (a shift) both
 * times are h(a): the lag was there from the start.
 */
export function lagBuildUp(fit: Pick<WarpFit, 'knots' | 'lags'>, lo = 0.1, hi = 0.9): [number, number] {
  const { knots } = fit;
  const end = endTime(fit);
  const a = knots[0];
  const start = lagAt(fit, a);
  const change = lagAt(fit, end) - start;
  const h = (s: number): number => s + lagAt(fit, s);
  if (!(Math.abs(change) > 1e-9)) return [h(a), h(a)];
  const sign = Math.sign(change);
  // Breakpoints of δ on [a, end]: the knots inside and the end.
  const points = [a];
  for (let j = 1; j < knots.length && knots[j] < end; j++) points.push(knots[j]);
  if (end > a) points.push(end);
  const first = (q: number): number => {
    const level = q * Math.abs(change);
    for (let k = 0; k + 1 < points.length; k++) {
      const v0 = sign * (lagAt(fit, points[k]) - start);
      const v1 = sign * (lagAt(fit, points[k + 1]) - start);
      if (v1 >= level && v1 > v0) {
        const f = Math.max(0, Math.min(1, (level - v0) / (v1 - v0)));
        return h(points[k] + f * (points[k + 1] - points[k]));
      }
    }
    return h(end);
  };
  return [first(lo), first(hi)];
}

/**
 * Split-conformal interval for a registration estimate (see the module comment): reference errors
 * e_i from curves whose true value is 0; [estimate − e_(k_hi), estimate − e_(k_lo)].
 */
export function predictionInterval(estimate: number, reference: ArrayLike<number>, alpha: number): [number, number] {
  if (!(alpha > 0 && alpha < 1)) throw new RangeError(`predictionInterval: alpha must be in (0, 1), got ${alpha}`);
  const e = Float64Array.from(reference).filter(Number.isFinite).sort();
  const N = e.length;
  const kLo = Math.floor((N + 1) * (alpha / 2));
  const kHi = Math.ceil((N + 1) * (1 - alpha / 2));
  const upper = kLo >= 1 ? estimate - e[kLo - 1] : Number.POSITIVE_INFINITY;
  const lower = kHi <= N ? estimate - e[kHi - 1] : Number.NEGATIVE_INFINITY;
  return [lower, upper];
}

/**
 * D(h) of a piecewise-linear lag (see the module comment), the compared weight and the window's
 * total weight; D is NaN when less than half of the window remains compared.
 */
export function warpDistance(curve: Float64Array, t: RegistrationTarget, fit: Pick<WarpFit, 'knots' | 'lags'>): { d: number; used: number; total: number } {
  checkShapes(curve, t);
  const M = t.window.length;
  let total = 0;
  let used = 0;
  let acc = 0;
  for (let g = 0; g < M; g++) {
    if (!(t.window[g] > 0)) continue;
    total += t.window[g];
    const cost = pointCost(curve, t, g, t.grid.points[g] + lagAt(fit, t.grid.points[g]));
    if (Number.isNaN(cost)) continue;
    acc += cost;
    used += t.window[g];
  }
  return { d: used > 0 && used >= 0.5 * total ? acc / used : Number.NaN, used, total };
}
