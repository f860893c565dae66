/**
 * What kind of discrepancy makes a run stand out: a shift in level, a change of shape, fine
 * structure, a time shift or warp, or more spread than simulated. Every candidate gets its evidence numbers
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
 *   timing   registration of the run to the mean m of the N simulated curves (the mean of the
 *            model the run is judged by; every simulated curve is registered to the same m), by ./registration.ts (least squares on the judged window, Ramsay &
 *            Silverman, "Functional Data Analysis", 2nd ed., Springer 2005, registration chapter,
 *            doi:10.1007/b98888), with lags searched up to span = the plan's
 *            analysis.registration.span × the horizon (0.2 × horizon by default):
 *            shift  τ̂ minimising D(τ) = Σ_g Σ_c w_g/s_c² (x_c(t_g + τ) − m_c(t_g))² / Σ_g w_g.
 *                   τ̂ > 0: the run is late (it does at t + τ̂ what the simulations do at t).
 *                   Evidence: τ̂ (s) and its rank among the simulated curves' own |τ̂_i| (pShift:
 *                   small when the run's timing is unusual); the fall ratio D(τ̂)/D(0) and its rank
 *                   (pRatio); pAfter, the overall conformal p-value of the re-timed run on the
 *                   overlap; a 1 − α interval for the shift, split-conformal from the simulated
 *                   curves' own shifts (their natural timing deviations, true shift 0).
 *            warp   when the curve stands out and the shift does not explain it: a smooth monotone
 *                   warp h(t) = t + δ(t), δ piecewise linear with few knots, slopes of h bounded
 *                   away from 0, a roughness penalty on the lag's changes scaled by the median
 *                   simulated distance. Evidence: pAfter of the warped run; when that no longer
 *                   stands out, every simulated curve is warped alike, giving the lag at the end
 *                   of the window with its 1 − α interval, the share of the run's excess distance
 *                   the warp removes, explained = 1 − (D(ĥ) − med D_i(ĥ_i)) / (D(0) − med D_i(0))
 *                   (D as in ./registration.ts; above 1 when the warped run sits closer to the
 *                   mean than the median warped simulated curve), max |δ| and its rank among the
 *                   simulated curves' (pLag, reported only: the simulated curves' warps also
 *                   absorb some of their own shape variation, so their lags are not a sharp
 *                   reference); and where the lag builds up (times of the run).
 *            The interval assumes the run's natural timing deviations are like the simulations'
 *            (exchangeable); where the live conditions make them larger, it is too narrow for the
 *            systematic lag (the demo test measures this).
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
 *      stands out (pAfter > α: the correction explains what made it stand out) and the correction
 *      is unusual for the simulations: for the shift the shift itself (pShift ≤ α; the fall ratio
 *      of D is diluted by the run's natural deviations elsewhere in the window, and requiring it
 *      too lost about one shifted run in ten in the tests' setting), for level the fall of Q
 *      (pRatio ≤ α). The warp explains the run when the warped run no longer stands out and the
 *      warp removes most of the run's excess distance (explained ≥ EXPLAINS_MOST = 1/2). Timing is
 *      explained by the shift, or failing that by the warp (the simpler registration first). Timing and level are tried first
 *      because a time shift or an offset also shows in the fixed-time statistics; if both explain,
 *      the larger pAfter wins. Otherwise `shape` when z(score) ≥ z(residual), else `fine`.
 *
 * The reassessments of corrected runs use the same calibration as the run (./calibrate.ts
 * conformalAssess; on the run's own window its cached reference), so pAfter is on the same scale as
 * the original p-value; the correction is fitted to the run alone, which
 * favours "explained", hence the second condition, which ranks the run's correction among the same
 * correction fitted to every simulated curve. Cost: two extra conformal fits and N + 1 shift
 * registrations; for a run that stands out and is not explained by a shift, one more conformal fit
 * and one warp, and N more warps when the warped run no longer stands out.
 */
import { solve, Matrix } from 'ml-matrix';
import { curvesForWindow, restrictTrack, type Baseline, type RunAssessment } from './assess.js';
import { conformalAssess, type CalibrationReference, type ConformalResult } from './calibrate.js';
import { projectCurve } from './fpca.js';
import { windowWeights, type Grid } from './grid.js';
import { lagAt, lagAtEnd, lagBuildUp, largestLag, predictionInterval, registerShift, registerWarp, warpedCurve, type RegistrationTarget } from './registration.js';
import { DEFAULT_REGISTRATION, type ComponentRule, type RawTrack } from './types.js';

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
  /**
   * Largest lag searched (shift and warp), as a fraction of the horizon (default: the plan's
   * `analysis.registration.span` in `diagnoseRun`, else 0.2).
   */
  readonly span?: number;
  /** Largest lag searched in seconds; overrides `span` when given. */
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
  /** For `timing`: how late or early, with an interval, and by which registration. */
  readonly timing?: TimingSize;
  readonly curveStandsOut: boolean;
  readonly spreadStandsOut: boolean;
  readonly evidence: {
    readonly overall: { readonly pValue: number; readonly z: number };
    readonly shape: StatisticEvidence;
    readonly fine: StatisticEvidence;
    /** Per-channel offset δ̂ in channel units. */
    readonly level: CorrectionEvidence & { readonly shift: readonly number[] };
    /**
     * τ̂ in seconds (> 0: the run is late); atLimit when it lies on the edge of the search. The
     * correction fields (pAfter, ratio, pRatio) are the shift's; `explains` is true when the shift
     * or the warp explains the run (`explainedBy`).
     */
    readonly timing: CorrectionEvidence & {
      readonly shift: number;
      /** Rank p-value of |τ̂| among the simulated curves' own |τ̂_i| (small: unusual timing). */
      readonly pShift: number;
      readonly atLimit: boolean;
      /** Largest lag searched, seconds. */
      readonly span: number;
      /** 1 − α split-conformal interval for the run's shift (engine/registration.ts). */
      readonly shiftInterval: readonly [number, number];
      readonly explainedBy?: 'shift' | 'warp';
      /** The monotone warp, fitted when the curve stands out and the shift does not explain it. */
      readonly warp?: WarpEvidence;
    };
    /** Run noise sd / median simulated noise sd, per channel. */
    readonly spread: StatisticEvidence & { readonly ratio: readonly number[] };
  };
}

/** The monotone time warp of a run onto the mean (engine/registration.ts), and what it explains. */
export interface WarpEvidence extends CorrectionEvidence {
  /** Knot times (s, the simulations' clock) and the lags δ_j there (s, > 0: late). */
  readonly knots: readonly number[];
  readonly lags: readonly number[];
  /**
   * The lag at the end of the run's window, s, and its 1 − α split-conformal interval. The interval,
   * pLag and pRatio need the simulated curves' warps, fitted only when the warped run no longer
   * stands out (pAfter > α); otherwise they are NaN.
   */
  readonly lagAtEnd: number;
  readonly lagInterval: readonly [number, number];
  /** Times of the run (its own clock) by which 10 % and 90 % of the lag had built up. */
  readonly buildUp: readonly [number, number];
  /** max |δ| over the compared part, s, and its rank p-value among the simulated curves' (upper tail). */
  readonly largest: number;
  readonly pLag: number;
  /**
   * Share of the run's excess distance (D(0) over the median simulated curve's) that the warp
   * removes, each curve warped alike: 1 − (D(ĥ) − med D_i(ĥ_i)) / (D(0) − med D_i(0)).
   */
  readonly explained: number;
  readonly atLimit: boolean;
}

/** The size of a timing discrepancy, present when the label is `timing`. */
export interface TimingSize {
  readonly model: 'shift' | 'warp';
  /** The shift, or the warp's lag at the end of the window, s (> 0: late). */
  readonly lag: number;
  /** Its 1 − α interval, s. */
  readonly interval: readonly [number, number];
  /** For a warp: where the lag built up, times of the run, s. */
  readonly buildUp?: readonly [number, number];
}

/** The warp explains "most" of a discrepancy when it removes at least this share of the excess. */
export const EXPLAINS_MOST = 0.5;

export const DIAGNOSIS_DEFAULTS = { alpha: 0.05, span: DEFAULT_REGISTRATION.span } as const;
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

/** D(0) of ./registration.ts: Σ_g Σ_c ω_cg (x_c(t_g) − m_c(t_g))² / Σ_g w_g over the window. */
function zeroDistance(x: Float64Array, mean: Float64Array, w: Float64Array, jw: Float64Array): number {
  const M = w.length;
  let acc = 0;
  let total = 0;
  for (let g = 0; g < M; g++) total += w[g] > 0 ? w[g] : 0;
  for (let d = 0; d < x.length; d++) if (w[d % M] > 0) acc += jw[d] * (x[d] - mean[d]) ** 2;
  return total > 0 ? acc / total : Number.NaN;
}

/** (1 + #{reference ≥ value}) / (N + 1): how unusually large `value` is among the reference. */
function upperRankP(reference: ArrayLike<number>, value: number): number {
  let count = 0;
  for (let i = 0; i < reference.length; i++) if (reference[i] >= value) count++;
  return (1 + count) / (reference.length + 1);
}

/** (1 + #{reference ≤ value}) / (N + 1): how unusually small `value` is among the reference. */
function lowerRankP(reference: ArrayLike<number>, value: number): number {
  let count = 0;
  for (let i = 0; i < reference.length; i++) if (reference[i] <= value) count++;
  return (1 + count) / (reference.length + 1);
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
  const span = options.maxShift ?? (options.span ?? DIAGNOSIS_DEFAULTS.span) * input.grid.horizon;
  const regs = all.map((x) => registerShift(x, { target: mean, window: input.gridWeights, joined: jw, grid: input.grid, span }));
  // The warp's roughness penalty in the units of D: the median simulated curve's distance D_i(0)
  // (./registration.ts), so a lag change of one span between neighbouring knots costs as much as a
  // typical curve's whole distance to the mean.
  const target: RegistrationTarget = { target: mean, window: input.gridWeights, joined: jw, grid: input.grid, span, roughness: median(sims.map((x) => zeroDistance(x, mean, input.gridWeights, jw))) };
  const reg = regs[N];
  const moved = warpedCurve(input.curve, mean, input.gridWeights, input.grid, () => reg.shift);
  const judged = (w: Float64Array): number => w.reduce((n, v) => n + (v > 0 ? 1 : 0), 0);
  const timingP = judged(moved.weights) >= 4 ? reassess(moved.curve, moved.weights) : Number.NaN;
  const timingRank = lowerRankP(regs.slice(0, N).map((r) => r.ratio), reg.ratio);
  const shiftRank = upperRankP(regs.slice(0, N).map((r) => Math.abs(r.shift)), Math.abs(reg.shift));
  const shiftExplains = timingP > alpha && shiftRank <= alpha;
  const curveStandsOut = p.overall <= alpha;

  // The warp, only where it can change the label: the curve stands out and the shift does not
  // explain it.
  let warp: WarpEvidence | undefined;
  if (curveStandsOut && !shiftExplains) {
    const fit = registerWarp(input.curve, target, reg.shift);
    const warped = warpedCurve(input.curve, mean, input.gridWeights, input.grid, (s) => lagAt(fit, s));
    const pAfter = judged(warped.weights) >= 4 ? reassess(warped.curve, warped.weights) : Number.NaN;
    const largest = largestLag(fit);
    const end = lagAtEnd(fit);
    // The simulated curves' warps (N fits) only when the warped run no longer stands out: otherwise
    // the warp cannot explain the run and its reference values are left NaN.
    const refs = pAfter > alpha ? sims.map((x, i) => registerWarp(x, target, regs[i].shift)) : undefined;
    const pLag = refs ? upperRankP(refs.map(largestLag), largest) : Number.NaN;
    // Share of the run's excess distance over the median simulated curve that the warp removes,
    // each curve warped alike: 1 − (D(ĥ) − med D_i(ĥ_i)) / (D(0) − med D_i(0)).
    const excess = refs ? fit.distance0 - median(refs.map((f) => f.distance0)) : Number.NaN;
    const explained = refs && excess > 0 ? 1 - (fit.distance - median(refs.map((f) => f.distance))) / excess : Number.NaN;
    warp = {
      knots: Array.from(fit.knots),
      lags: Array.from(fit.lags),
      lagAtEnd: end,
      lagInterval: refs ? predictionInterval(end, refs.map(lagAtEnd), alpha) : [Number.NaN, Number.NaN],
      buildUp: lagBuildUp(fit),
      largest,
      pLag,
      atLimit: fit.atLimit,
      ratio: fit.ratio,
      pRatio: refs ? lowerRankP(refs.map((f) => f.ratio), fit.ratio) : Number.NaN,
      explained,
      pAfter,
      explains: pAfter > alpha && explained >= EXPLAINS_MOST,
    };
  }
  const explainedBy: 'shift' | 'warp' | undefined = shiftExplains ? 'shift' : warp?.explains ? 'warp' : undefined;
  const timing = {
    shift: reg.shift,
    pShift: shiftRank,
    atLimit: reg.atLimit,
    span,
    shiftInterval: predictionInterval(reg.shift, regs.slice(0, N).map((r) => r.shift), alpha),
    ratio: reg.ratio,
    pRatio: timingRank,
    pAfter: timingP,
    explains: explainedBy !== undefined,
    ...(explainedBy !== undefined && { explainedBy }),
    ...(warp !== undefined && { warp }),
  };

  const spread = spreadEvidence(input.noise, C);
  const spreadStandsOut = spread.pValue <= alpha;
  const evidence = { overall: { pValue: p.overall, z: zCurve }, shape, fine, level, timing, spread };
  const out = (kind: DiscrepancyKind, reason: string): Diagnosis => ({ kind, reason, curveStandsOut, spreadStandsOut, evidence });

  if (!curveStandsOut && !spreadStandsOut) {
    return out('none', `overall p = ${fmt(p.overall)} and spread p = ${fmt(spread.pValue)} are both above ${fmt(alpha)}`);
  }
  if (spreadStandsOut && (!curveStandsOut || spread.z >= zCurve)) {
    return out('spread', `noise sd ${spread.ratio.map((r) => `${fmt(r)}×`).join(', ')} the simulated median (p = ${fmt(spread.pValue)}, z = ${fmt(spread.z)})`);
  }
  const timingAfter = explainedBy === 'warp' ? (warp?.pAfter ?? Number.NaN) : timing.pAfter;
  if (timing.explains && (!level.explains || timingAfter >= level.pAfter)) {
    const late = (x: number): string => (x >= 0 ? `${fmt(x)} s late` : `${fmt(-x)} s early`);
    const range = (r: readonly [number, number]): string => `${fmt(r[0])} to ${fmt(r[1])} s`;
    const level95 = `${fmt(100 * (1 - alpha))} %`;
    if (explainedBy === 'warp' && warp !== undefined) {
      const size: TimingSize = { model: 'warp', lag: warp.lagAtEnd, interval: warp.lagInterval, buildUp: warp.buildUp };
      return {
        ...out('timing', `the run ends ${late(warp.lagAtEnd)} (${level95} interval ${range(warp.lagInterval)}), the lag building up between t = ${fmt(warp.buildUp[0])} s and ${fmt(warp.buildUp[1])} s of the run; the time warp removes ${fmt(100 * Math.min(1, warp.explained))} % of its excess distance and leaves p = ${fmt(warp.pAfter)}, a shift of ${fmt(timing.shift)} s leaves p = ${fmt(timing.pAfter)}`),
        timing: size,
      };
    }
    const size: TimingSize = { model: 'shift', lag: timing.shift, interval: timing.shiftInterval };
    return {
      ...out('timing', `the run is ${late(timing.shift)} (${level95} interval ${range(timing.shiftInterval)}; p = ${fmt(timing.pShift)} among simulated timings); re-timed, p = ${fmt(timing.pAfter)}`),
      timing: size,
    };
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
    { ...options, alpha: options.alpha ?? baseline.settings.alpha, span: options.span ?? baseline.settings.registration?.span },
  );
}
