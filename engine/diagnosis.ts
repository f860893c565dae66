/**
 * What kind of discrepancy makes a run stand out: a shift in level, a change of shape, fine
 * structure, a time shift, or more spread than simulated. Every candidate gets its evidence numbers
 * and a documented rule picks the dominant one. The diagnosis describes; the verdict stays the run's
 * conformal p-value (./calibrate.ts).
 *
 * Evidence (distances in the scaled units of ./calibrate.ts, each channel divided by s_c):
 *   shape    the score statistic (what the leading components carry): its rank p-value from the
 *            assessment and a robust z of its logarithm against the simulated curves' values,
 *            z = (ln S − med ln S_i) / (1.4826 · MAD ln S_i)
 *            (median/MAD standardisation, Rousseeuw & Croux, JASA 88:1273–1283, 1993,
 *            doi:10.1080/01621459.1993.10476408; logarithms because distances are positive and
 *            right-skewed). The robust z is the common currency for comparing candidates, because
 *            rank p-values stop at 1/(N + 1) and cannot rank two extreme statistics.
 *   fine     the residual statistic (what the leading components miss): p-value and robust z. A
 *            discrepancy outside the kept components (a narrow bump, a shape the variance rule did
 *            not keep) is `fine` by this definition, however it looks to the eye.
 *   level    δ̂_c, the per-channel constant that best explains the run's deviation under the fitted
 *            model: it minimises Q(δ) = Σ_k ξ_k(δ)²/(K λ_k) + ‖r(δ)‖²/ν for the deviation
 *            x − m − Σ_c δ_c 1_c, with ξ_k its K scores, r its residual and ν the simulated curves'
 *            mean squared residual (each term has mean about 1 under the null). Q is quadratic in δ,
 *            so δ̂ solves a C × C linear system (generalised least squares, Aitken, Proc. R. Soc.
 *            Edinburgh 55:42–48, 1935). A plain mean offset would also remove the run's natural level
 *            variation (the leading modes have non-zero means) and leave an untypical remainder; the
 *            model weighting keeps it. Evidence: δ̂ (channel units); the fall ratio Q(δ̂)/Q(0) and its
 *            rank among the simulated curves' own fall ratios (pRatio: small when the offset explains
 *            unusually much); pAfter, the overall conformal p-value of the corrected run x − δ̂.
 *   timing   τ̂, the shift that best registers the run to the mean m of the N + 1 curves (the
 *            simulated mean up to 1/(N + 1) of the run's deviation, so that the run and every
 *            simulated curve are registered alike): it minimises
 *            D(τ) = Σ_g Σ_c w_g/s_c² (x_c(t_g + τ) − m_c(t_g))² / Σ_g w_g over the judged grid points
 *            whose shifted time still lies in the judged window (shift registration by least squares,
 *            Ramsay & Silverman, "Functional Data Analysis", 2nd ed., Springer 2005, §7.2,
 *            doi:10.1007/b98888). x is linear between grid points; τ runs over a lattice of step
 *            grid.step/4 in [−maxShift, maxShift] (the overlap must keep half of the window), then
 *            one parabolic step through the best lattice point and its neighbours (clamped to half a
 *            lattice step). τ̂ > 0: the run is late (it does at t + τ̂ what the simulations do at t).
 *            Evidence: τ̂ (s) and its rank among the simulated curves' own |τ̂_i| (pShift: small when
 *            the run's timing is unusual); the fall ratio D(τ̂)/D(0) on the same points and its rank
 *            (pRatio); pAfter, the overall conformal p-value of the re-timed run on the overlap.
 *   spread   the run's per-channel noise sd against the simulated tracks' (made the same way, e.g.
 *            by `noiseSd`): rank p-value per channel (upper tail), Bonferroni over channels, and the
 *            largest robust z of ln sd. The smoothed curves hide the noise, so this candidate uses
 *            information the conformal statistics do not have.
 *
 * Rule (α = the plan's alpha, 0.05 by default):
 *   1. The curve stands out when the assessment's overall p ≤ α (the run's verdict); the spread
 *      stands out when its p ≤ α. Neither → `none`. (A null run gets another label with probability
 *      at most 2α by the union bound; test/engine/diagnosis.test.ts measures the rate.)
 *   2. `spread` when the spread stands out and either the curve does not, or z(spread) ≥ the largest
 *      z of the curve statistics (l2, score, residual).
 *   3. Otherwise the curve label. A correction explains the run when the corrected run no longer
 *      stands out (pAfter > α) and the correction is unusual for the simulations: for timing the
 *      shift itself (pShift ≤ α; the fall ratio of D is diluted by the run's natural deviations
 *      elsewhere in the window, and requiring it too lost about one shifted run in ten in the
 *      tests' setting), for level the fall of Q (pRatio ≤ α). Timing and level are tried first
 *      because a time shift or an offset also shows in the fixed-time statistics; if both explain,
 *      the larger pAfter wins. Otherwise `shape` when z(score) ≥ z(residual), else `fine`.
 *
 * The reassessments of corrected runs are full conformal (./calibrate.ts conformalAssess), so pAfter
 * is on the same scale as the original p-value; the correction is fitted to the run alone, which
 * favours "explained", hence the second condition, which ranks the run's correction among the same
 * correction fitted to every simulated curve. Cost: two extra conformal fits and N + 1 registrations.
 */
import { solve, Matrix } from 'ml-matrix';
import { curvesForWindow, restrictTrack, type Baseline, type RunAssessment } from './assess.js';
import { conformalAssess, type CalibrationReference, type ConformalResult } from './calibrate.js';
import { projectCurve } from './fpca.js';
import { windowWeights, type Grid } from './grid.js';
import type { ComponentRule, RawTrack } from './types.js';

export type DiscrepancyKind = 'level' | 'shape' | 'fine' | 'timing' | 'spread' | 'none';

export interface DiagnosisInput {
  /** The run's smoothed curve: channel blocks of M grid values, physical units. */
  readonly curve: Float64Array;
  /** The simulated curves of the same window, same layout. */
  readonly sims: readonly Float64Array[];
  /** Trapezoid weights of the judged window (./grid.ts windowWeights); 0 outside it. */
  readonly gridWeights: Float64Array;
  readonly grid: Grid;
  readonly channels: number;
  /** The run's assessment against `sims` with these weights (./calibrate.ts conformalAssess). */
  readonly result: ConformalResult;
  /** The component rule of that assessment, reused for the corrected runs. */
  readonly rule: ComponentRule;
  /**
   * Per-channel noise sd of the run and of reference simulated tracks, estimated the same way for
   * all (e.g. `noiseSd` on the samples of the judged window, or the P-spline residual sd). With C
   * channels the spread p-value can reach α only with at least C/α − 1 reference tracks.
   */
  readonly noise: { readonly run: readonly number[]; readonly sims: readonly (readonly number[])[] };
}

export interface DiagnosisOptions {
  /** Level of the rule (default 0.05; see the module comment). */
  readonly alpha?: number;
  /** Largest time shift searched, seconds (default 30). */
  readonly maxShift?: number;
  /** Seed of the component solver for the reassessments (default: the engine's). */
  readonly seed?: number;
  /** The window's calibration reference (./calibrate.ts buildReference), reused by reassessments on the same window. */
  readonly reference?: CalibrationReference;
}

export interface StatisticEvidence {
  readonly pValue: number;
  readonly z: number;
}

export interface CorrectionEvidence {
  /** Overall conformal p-value of the corrected run. */
  readonly pAfter: number;
  /** The discrepancy after / before the correction (the criterion the correction minimises). */
  readonly ratio: number;
  /** Rank p-value of that ratio among the simulated curves' own ratios (small: unusually large fall). */
  readonly pRatio: number;
  readonly explains: boolean;
}

export interface Diagnosis {
  readonly kind: DiscrepancyKind;
  /** One sentence: why this label. */
  readonly reason: string;
  readonly curveStandsOut: boolean;
  readonly spreadStandsOut: boolean;
  readonly evidence: {
    readonly overall: { readonly pValue: number; readonly z: number };
    readonly shape: StatisticEvidence;
    readonly fine: StatisticEvidence;
    /** Per-channel offset δ̂ in channel units. */
    readonly level: CorrectionEvidence & { readonly shift: readonly number[] };
    /** τ̂ in seconds (> 0: the run is late); atLimit when it lies on the edge of the search. */
    readonly timing: CorrectionEvidence & {
      readonly shift: number;
      /** Rank p-value of |τ̂| among the simulated curves' own |τ̂_i| (small: unusual timing). */
      readonly pShift: number;
      readonly atLimit: boolean;
    };
    /** Run noise sd / median simulated noise sd, per channel. */
    readonly spread: StatisticEvidence & { readonly ratio: readonly number[] };
  };
}

export const DIAGNOSIS_DEFAULTS = { alpha: 0.05, maxShift: 30 } as const;
const MAD_SCALE = 1.482602218505602; // 1 / Φ⁻¹(3/4)

function median(values: ArrayLike<number>): number {
  const s = Float64Array.from(values).sort();
  const n = s.length;
  if (n === 0) return Number.NaN;
  return n % 2 ? s[n >> 1] : (s[n / 2 - 1] + s[n / 2]) / 2;
}

/** Robust z of ln(value) against ln(reference): (ln v − median) / (1.4826 · MAD). */
export function robustLogZ(value: number, reference: ArrayLike<number>): number {
  const logs = Float64Array.from(reference, (v) => Math.log(Math.max(v, Number.MIN_VALUE)));
  const med = median(logs);
  const mad = MAD_SCALE * median(logs.map((v) => Math.abs(v - med)));
  const d = Math.log(Math.max(value, Number.MIN_VALUE)) - med;
  if (mad > 0) return d / mad;
  return d > 0 ? Number.POSITIVE_INFINITY : d < 0 ? Number.NEGATIVE_INFINITY : 0;
}

/**
 * Per-channel noise sd of a track from its raw samples, without smoothing: the pseudo-residuals
 * e_i = (a_i y_{i−1} + b_i y_{i+1} − y_i) / √(a_i² + b_i² + 1), a_i = (t_{i+1} − t_i)/(t_{i+1} − t_{i−1}),
 * b_i = 1 − a_i, which remove a locally linear signal and have variance σ² (Gasser, Sroka &
 * Jennen-Steinmetz, Biometrika 73(3):625–633, 1986, doi:10.1093/biomet/73.3.625), summarised
 * robustly by 1.4826 · median |e_i| so that a short glitch does not count as noise. NaN for a
 * channel with fewer than 3 samples.
 */
export function noiseSd(track: RawTrack): number[] {
  const { t } = track;
  return track.values.map((y) => {
    const n = t.length;
    if (n < 3) return Number.NaN;
    const e = new Float64Array(n - 2);
    for (let i = 1; i < n - 1; i++) {
      const span = t[i + 1] - t[i - 1];
      const a = (t[i + 1] - t[i]) / span;
      const b = 1 - a;
      e[i - 1] = Math.abs((a * y[i - 1] + b * y[i + 1] - y[i]) / Math.sqrt(a * a + b * b + 1));
    }
    return MAD_SCALE * median(e);
  });
}

/** Trapezoid weights of the grid points in `mask` (runs of consecutive points; ./grid.ts rule). */
function maskWeights(mask: Uint8Array, step: number): Float64Array {
  const w = new Float64Array(mask.length);
  for (let g = 0; g < mask.length; g++) {
    if (!mask[g]) continue;
    const left = g > 0 && mask[g - 1] === 1;
    const right = g + 1 < mask.length && mask[g + 1] === 1;
    w[g] = left || right ? ((left ? 1 : 0) + (right ? 1 : 0)) * (step / 2) : step / 2;
  }
  return w;
}

/** (1 + #{reference ≤ value}) / (N + 1): how unusually small `value` is among the reference. */
function lowerRankP(reference: ArrayLike<number>, value: number): number {
  let count = 0;
  for (let i = 0; i < reference.length; i++) if (reference[i] <= value) count++;
  return (1 + count) / (reference.length + 1);
}

/** Sub-steps of the registration lattice per grid step. */
const SUBSTEPS = 4;

interface ShiftFit {
  readonly shift: number;
  readonly atLimit: boolean;
  /** D(τ̂) / D(0) on the same grid points. */
  readonly ratio: number;
}

/**
 * Shift registration of one curve to the mean (see the module comment). `w` are the grid weights of
 * the window and `jw` the joined weights (grid weight / s_c², channel blocks), as in the model.
 */
function registerShift(curve: Float64Array, mean: Float64Array, w: Float64Array, jw: Float64Array, grid: Grid, maxShift: number): ShiftFit {
  const M = w.length;
  const C = curve.length / M;
  let total = 0;
  for (let g = 0; g < M; g++) total += w[g];
  /** D(τ) and D(0) over the grid points where x(t_g + τ) is defined; NaN below half the window. */
  const distance = (tau: number): { d: number; d0: number } => {
    let acc = 0;
    let acc0 = 0;
    let used = 0;
    for (let g = 0; g < M; g++) {
      if (!(w[g] > 0)) continue;
      const p = g + tau / grid.step;
      const i = Math.floor(p + 1e-9);
      const f = Math.max(0, p - i);
      if (i < 0 || i >= M || !(w[i] > 0)) continue;
      if (f > 1e-9 && (i + 1 >= M || !(w[i + 1] > 0))) continue;
      for (let c = 0; c < C; c++) {
        const d = c * M;
        const x = f > 1e-9 ? (1 - f) * curve[d + i] + f * curve[d + i + 1] : curve[d + i];
        acc += jw[d + g] * (x - mean[d + g]) ** 2;
        acc0 += jw[d + g] * (curve[d + g] - mean[d + g]) ** 2;
      }
      used += w[g];
    }
    return used >= 0.5 * total && used > 0 ? { d: acc / used, d0: acc0 / used } : { d: Number.NaN, d0: Number.NaN };
  };
  const delta = grid.step / SUBSTEPS;
  const J = Math.floor(maxShift / delta);
  const values = Float64Array.from({ length: 2 * J + 1 }, (_, j) => distance((j - J) * delta).d);
  let best = J;
  for (let j = 0; j < values.length; j++) if (values[j] < values[best]) best = j;
  let shift = (best - J) * delta;
  const lo = best > 0 ? values[best - 1] : Number.NaN;
  const hi = best + 1 < values.length ? values[best + 1] : Number.NaN;
  const curvature = lo - 2 * values[best] + hi;
  if (curvature > 0) shift -= Math.max(-0.5, Math.min(0.5, (hi - lo) / (2 * curvature))) * delta;
  const { d, d0 } = distance(shift);
  return { shift, atLimit: best === 0 || best === 2 * J, ratio: d0 > 0 ? d / d0 : 1 };
}

/** The curve read at t + shift, on the grid points where that time lies in the window. */
function shiftedCurve(curve: Float64Array, mean: Float64Array, w: Float64Array, grid: Grid, shift: number): { curve: Float64Array; weights: Float64Array } {
  const M = w.length;
  const C = curve.length / M;
  const mask = new Uint8Array(M);
  const out = Float64Array.from(mean);
  for (let g = 0; g < M; g++) {
    if (!(w[g] > 0)) continue;
    const p = g + shift / grid.step;
    const i = Math.floor(p + 1e-9);
    const f = Math.max(0, p - i);
    if (i < 0 || i >= M || !(w[i] > 0)) continue;
    if (f > 1e-9 && (i + 1 >= M || !(w[i + 1] > 0))) continue;
    mask[g] = 1;
    for (let c = 0; c < C; c++) {
      const d = c * M;
      out[d + g] = f > 1e-9 ? (1 - f) * curve[d + i] + f * curve[d + i + 1] : curve[d + i];
    }
  }
  return { curve: out, weights: maskWeights(mask, grid.step) };
}

/**
 * The per-channel level fit under the model (see the module comment), for every curve of the fit:
 * δ̂ and Q(δ̂)/Q(0). The normal matrix depends only on the model, so it is solved once.
 */
function levelFits(result: ConformalResult, curves: readonly Float64Array[], C: number): Array<{ shift: number[]; ratio: number }> {
  const { model } = result;
  const D = model.weights.length;
  const M = D / C;
  const K = model.eigenvalues.length;
  let nu = 0;
  for (const r of result.reference.residual) nu += r * r;
  nu = Math.max(nu / result.reference.residual.length, 1e-12 * model.totalVariance, Number.MIN_VALUE);
  // A_kc = ⟨1_c, φ_k⟩ and ⟨1_c, 1_c⟩ in the model's inner product.
  const A = model.eigenfunctions.map((phi) => {
    const row = new Float64Array(C);
    for (let d = 0; d < D; d++) row[Math.floor(d / M)] += model.weights[d] * phi[d];
    return row;
  });
  const oneOne = new Float64Array(C);
  for (let d = 0; d < D; d++) oneOne[Math.floor(d / M)] += model.weights[d];
  // Normal matrix Σ_k A_kaA_kb/(Kλ_k) + (⟨1_a, 1_b⟩ − Σ_k A_kaA_kb)/ν.
  const lhs = new Matrix(C, C);
  for (let a = 0; a < C; a++) {
    for (let b = 0; b < C; b++) {
      let v = a === b ? oneOne[a] / nu : 0;
      for (let k = 0; k < K; k++) v += A[k][a] * A[k][b] * (1 / (K * model.eigenvalues[k]) - 1 / nu);
      lhs.set(a, b, v);
    }
  }
  return curves.map((x, i) => {
    // The model's own curves have their scores; the live curve (beyond them) is projected.
    const xi = model.scores[i] ?? projectCurve(model, x).scores;
    const oneE = new Float64Array(C);
    let ee = 0;
    for (let d = 0; d < D; d++) {
      const e = x[d] - model.mean[d];
      oneE[Math.floor(d / M)] += model.weights[d] * e;
      ee += model.weights[d] * e * e;
    }
    // Right-hand side Σ_k A_kc ξ_k/(Kλ_k) + (⟨1_c, e⟩ − Σ_k A_kc ξ_k)/ν.
    const rhs = new Matrix(C, 1);
    for (let c = 0; c < C; c++) {
      let v = oneE[c] / nu;
      for (let k = 0; k < K; k++) v += A[k][c] * xi[k] * (1 / (K * model.eigenvalues[k]) - 1 / nu);
      rhs.set(c, 0, v);
    }
    const shift = solve(lhs, rhs).getColumn(0);
    /** Q(δ) = Σ_k ξ_k(δ)²/(Kλ_k) + (‖e − Σδ_c1_c‖² − Σ_k ξ_k(δ)²)/ν. */
    const q = (delta: readonly number[]): number => {
      let l2 = ee;
      for (let c = 0; c < C; c++) l2 += delta[c] * (delta[c] * oneOne[c] - 2 * oneE[c]);
      let score = 0;
      let kept = 0;
      for (let k = 0; k < K; k++) {
        let s = xi[k];
        for (let c = 0; c < C; c++) s -= A[k][c] * delta[c];
        score += (s * s) / (K * model.eigenvalues[k]);
        kept += s * s;
      }
      return score + Math.max(0, l2 - kept) / nu;
    };
    const q0 = q(new Array<number>(C).fill(0));
    return { shift, ratio: q0 > 0 ? q(shift) / q0 : 1 };
  });
}

/** Rank p-value of the run's noise (upper tail) per channel, Bonferroni over channels. */
function spreadEvidence(noise: DiagnosisInput['noise'], C: number): StatisticEvidence & { ratio: number[] } {
  let pMin = 1;
  let z = Number.NEGATIVE_INFINITY;
  const ratio: number[] = [];
  for (let c = 0; c < C; c++) {
    const ref = noise.sims.map((s) => s[c]).filter(Number.isFinite);
    const v = noise.run[c];
    if (!Number.isFinite(v) || ref.length === 0) {
      ratio.push(Number.NaN);
      continue;
    }
    let count = 0;
    for (const r of ref) if (r >= v) count++;
    pMin = Math.min(pMin, (1 + count) / (ref.length + 1));
    z = Math.max(z, robustLogZ(v, ref));
    ratio.push(v / median(ref));
  }
  return { pValue: Math.min(1, C * pMin), z, ratio };
}

/** Diagnose a run's dominant kind of discrepancy (see the module comment for the rule). */
export function diagnose(input: DiagnosisInput, options: DiagnosisOptions = {}): Diagnosis {
  const { result, sims, channels: C, rule } = input;
  const alpha = options.alpha ?? DIAGNOSIS_DEFAULTS.alpha;
  const maxShift = options.maxShift ?? DIAGNOSIS_DEFAULTS.maxShift;
  const M = input.grid.points.length;
  if (input.curve.length !== C * M || input.gridWeights.length !== M) {
    throw new RangeError(`diagnose: curve of ${input.curve.length} values and ${input.gridWeights.length} weights for ${C} channels × ${M} grid points`);
  }
  if (sims.length < 3) throw new RangeError(`diagnose: need at least 3 simulated curves, got ${sims.length}`);
  if (input.noise.run.length !== C) throw new RangeError(`diagnose: noise of the run has ${input.noise.run.length} channels, expected ${C}`);
  const reassess = (curve: Float64Array, weights: Float64Array): number =>
    conformalAssess(sims, curve, weights, C, rule, { seed: options.seed, reference: weights === input.gridWeights ? options.reference : undefined }).pValues.overall;

  const p = result.pValues;
  const zL2 = robustLogZ(result.live.l2, result.reference.l2);
  const shape = { pValue: p.score, z: robustLogZ(result.live.score, result.reference.score) };
  const fine = { pValue: p.residual, z: robustLogZ(result.live.residual, result.reference.residual) };
  const zCurve = Math.max(zL2, shape.z, fine.z);

  // Level and timing: the run's fall ratio ranked among the simulated curves' own (each curve of
  // the one fit treated alike), and the corrected run reassessed.
  const all = [...sims, input.curve];
  const N = sims.length;
  const fits = levelFits(result, all, C);
  const lv = fits[N];
  const levelCurve = Float64Array.from(input.curve, (x, d) => x - lv.shift[Math.floor(d / M)]);
  const levelP = reassess(levelCurve, input.gridWeights);
  const levelRank = lowerRankP(fits.slice(0, N).map((f) => f.ratio), lv.ratio);
  const level = { shift: lv.shift, ratio: lv.ratio, pRatio: levelRank, pAfter: levelP, explains: levelP > alpha && levelRank <= alpha };

  const { mean, weights: jw } = result.model;
  const regs = all.map((x) => registerShift(x, mean, input.gridWeights, jw, input.grid, maxShift));
  const reg = regs[N];
  const moved = shiftedCurve(input.curve, mean, input.gridWeights, input.grid, reg.shift);
  let count = 0;
  for (const v of moved.weights) if (v > 0) count++;
  const timingP = count >= 4 ? reassess(moved.curve, moved.weights) : Number.NaN;
  const timingRank = lowerRankP(regs.slice(0, N).map((r) => r.ratio), reg.ratio);
  let larger = 0;
  for (let i = 0; i < N; i++) if (Math.abs(regs[i].shift) >= Math.abs(reg.shift)) larger++;
  const shiftRank = (1 + larger) / (N + 1);
  const timing = {
    shift: reg.shift,
    pShift: shiftRank,
    atLimit: reg.atLimit,
    ratio: reg.ratio,
    pRatio: timingRank,
    pAfter: timingP,
    explains: timingP > alpha && shiftRank <= alpha,
  };

  const spread = spreadEvidence(input.noise, C);
  const curveStandsOut = p.overall <= alpha;
  const spreadStandsOut = spread.pValue <= alpha;
  const evidence = { overall: { pValue: p.overall, z: zCurve }, shape, fine, level, timing, spread };
  const out = (kind: DiscrepancyKind, reason: string): Diagnosis => ({ kind, reason, curveStandsOut, spreadStandsOut, evidence });

  if (!curveStandsOut && !spreadStandsOut) {
    return out('none', `overall p = ${fmt(p.overall)} and spread p = ${fmt(spread.pValue)} are both above ${fmt(alpha)}`);
  }
  if (spreadStandsOut && (!curveStandsOut || spread.z >= zCurve)) {
    return out('spread', `noise sd ${spread.ratio.map((r) => `${fmt(r)}×`).join(', ')} the simulated median (p = ${fmt(spread.pValue)}, z = ${fmt(spread.z)})`);
  }
  if (timing.explains && (!level.explains || timing.pAfter >= level.pAfter)) {
    const when = timing.shift >= 0 ? `${fmt(timing.shift)} s late` : `${fmt(-timing.shift)} s early`;
    return out('timing', `the run is ${when} (p = ${fmt(timing.pShift)} among simulated timings); re-timed, p = ${fmt(timing.pAfter)}`);
  }
  if (level.explains) {
    return out('level', `offsets ${level.shift.map(fmt).join(', ')} explain ${fmt(1 - level.ratio)} of its model distance; removed, p = ${fmt(level.pAfter)}`);
  }
  if (shape.z >= fine.z) return out('shape', `score distance z = ${fmt(shape.z)} (p = ${fmt(shape.pValue)}) beyond the residual z = ${fmt(fine.z)}`);
  return out('fine', `residual distance z = ${fmt(fine.z)} (p = ${fmt(fine.pValue)}) beyond the score z = ${fmt(shape.z)}`);
}

function fmt(x: number): string {
  return Number.isFinite(x) ? Number(x.toPrecision(3)).toString() : String(x);
}

/**
 * Convenience for the service: diagnose an assessed run from its vignette's baseline and its raw
 * track. Uses the simulated curves of the run's window (cached for a full window, re-smoothed
 * otherwise, or `windowCurves` when the caller has them) and `noiseSd` of every track cut to the
 * window.
 */
export function diagnoseRun(
  baseline: Baseline,
  run: RawTrack,
  assessment: RunAssessment,
  options: DiagnosisOptions & { readonly windowCurves?: readonly Float64Array[] } = {},
): Diagnosis {
  const { window } = assessment;
  const sims = options.windowCurves ?? curvesForWindow(baseline, window).curves;
  return diagnose(
    {
      curve: assessment.curve,
      sims,
      gridWeights: windowWeights(baseline.grid, window),
      grid: baseline.grid,
      channels: baseline.channels.length,
      result: assessment.result,
      rule: baseline.settings.components,
      noise: {
        run: noiseSd(restrictTrack(run, window)),
        sims: baseline.sims.map((s) => noiseSd(restrictTrack(s, window))),
      },
    },
    { ...options, alpha: options.alpha ?? baseline.settings.alpha },
  );
}
