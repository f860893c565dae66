/**
 * Projection of the rest of a track from the part observed so far, under the baseline model.
 *
 * Method: the conditional expectation of a Gaussian process given part of its path, with the
 * process written in its principal components (the PACE idea of Yao, Müller & Wang, "Functional
 * data analysis for sparse longitudinal data", JASA 100(470):577–590, 2005,
 * doi:10.1198/016214504000001745). With the simulated runs' mean μ, eigenfunctions φ_k and
 * eigenvalues λ_k (k ≤ K, many components: `PROJECTION_COMPONENTS`), and τ_c² the variance the
 * components leave unexplained on channel c (averaged over the grid, a "nugget"), a curve is
 * x(t) = μ(t) + Σ ξ_k φ_k(t) + e(t), ξ ~ N(0, Λ), e ~ N(0, τ²). Given the observed grid points O:
 *   S = (Σ_{g∈O} φ(g)φ(g)ᵀ / τ²_{c(g)} + Λ⁻¹)⁻¹,   ξ̂ = S Σ_{g∈O} φ(g)(x(g) − μ(g)) / τ²_{c(g)},
 *   x̂(t) = μ(t) + φ(t)ᵀ ξ̂,   Var(x(t) | O) = φ(t)ᵀ S φ(t) + τ²_{c(t)}.
 * Everything is in physical units.
 *
 * The band is x̂ ± z·sd. The Gaussian model treats the smoothed residuals e(t) as independent from
 * grid point to grid point, which they are not (smoothed curves are correlated along the track), so
 * the conditional sd is too small and the normal quantile would undercover (measured: about 9 % of
 * unseen points outside a nominal 95 % band). The multiplier z is therefore calibrated on simulated
 * runs the model did not see, by `FOLDS`-fold cross-fitting (the split-conformal idea, Lei, G'Sell,
 * Rinaldo, Tibshirani & Wasserman, JASA 113:1094–1111, 2018, doi:10.1080/01621459.2017.1307116):
 * the simulated runs are split into folds by index, the model of the runs outside each fold projects
 * the fold's runs from the same observed grid points, and z is the ⌈level·(n + 1)⌉-th smallest of the n
 * standardised errors |x(t) − x̂(t)|/sd(t) pooled over those runs and the unseen grid points. The
 * band then covers a fresh run's unseen value at the level on average over the unseen points.
 */
import { Matrix, inverse } from 'ml-matrix';
import { channelScales, joinedWeights } from './calibrate.js';
import { fitFpca, type FpcaModel } from './fpca.js';
import { normalQuantile } from './normal.js';

export const PROJECTION_COMPONENTS = 30;

export interface ProjectionModel {
  readonly fpca: FpcaModel;
  /** Per-channel unexplained variance τ_c² (physical units squared). */
  readonly nugget: Float64Array;
  readonly channels: number;
  readonly gridSize: number;
  /** The cross-fitting folds: a model of the simulated runs outside the fold and the fold's curves. */
  readonly folds: ReadonlyArray<{ readonly fpca: FpcaModel; readonly nugget: Float64Array; readonly held: readonly Float64Array[] }>;
  /** Memo of `calibratedMultiplier` by observed pattern and level (the same value with or without it). */
  readonly multipliers: Map<string, number>;
}

/** Cross-fitting folds of the band's calibration (module comment). */
export const FOLDS = 5;
/** Observed patterns whose multiplier is kept (runs in flight share their prefix windows). */
const MULTIPLIER_MEMO = 256;

/** The FPCA with `PROJECTION_COMPONENTS` components and the per-channel nugget of a set of curves. */
function gaussianModel(curves: readonly Float64Array[], gridWeights: Float64Array, channels: number, seed: number): { fpca: FpcaModel; nugget: Float64Array } {
  const M = gridWeights.length;
  const scales = channelScales(curves, gridWeights, channels);
  const weights = joinedWeights(gridWeights, scales);
  const fpca = fitFpca(curves, weights, { kind: 'fixed', count: Math.min(PROJECTION_COMPONENTS, curves.length - 2) }, { seed });
  const N = curves.length;
  const nugget = new Float64Array(channels);
  for (let c = 0; c < channels; c++) {
    let acc = 0;
    for (let g = 0; g < M; g++) {
      const d = c * M + g;
      let v = 0;
      for (let i = 0; i < N; i++) v += (curves[i][d] - fpca.mean[d]) ** 2;
      v /= N - 1;
      let explained = 0;
      for (let k = 0; k < fpca.eigenvalues.length; k++) explained += fpca.eigenvalues[k] * fpca.eigenfunctions[k][d] ** 2;
      acc += Math.max(v - explained, 0);
    }
    // A floor keeps S well defined when the components explain everything (1e-6 of the scale²).
    nugget[c] = Math.max(acc / M, 1e-6 * scales[c] * scales[c]);
  }
  return { fpca, nugget };
}

/** Fit the projection model on the simulated runs' full-window curves (channel blocks of M). */
export function fitProjectionModel(curves: readonly Float64Array[], gridWeights: Float64Array, channels: number, seed = 0x5eed): ProjectionModel {
  if (curves.length < 8) throw new RangeError(`fitProjectionModel: need at least 8 simulated curves, got ${curves.length}`);
  const full = gaussianModel(curves, gridWeights, channels, seed);
  const folds = Array.from({ length: FOLDS }, (_, f) => ({
    ...gaussianModel(
      curves.filter((_, i) => i % FOLDS !== f),
      gridWeights,
      channels,
      seed,
    ),
    held: curves.filter((_, i) => i % FOLDS === f),
  }));
  return { ...full, channels, gridSize: gridWeights.length, folds, multipliers: new Map() };
}

/** The posterior of the scores given the observed grid points: S, and the conditional sd at every point. */
function conditional(fpca: FpcaModel, nugget: Float64Array, channels: number, M: number, observed: Uint8Array): { S: Matrix; sd: Float64Array } {
  const K = fpca.eigenvalues.length;
  const A = new Matrix(K, K);
  for (let c = 0; c < channels; c++) {
    const inv = 1 / nugget[c];
    for (let g = 0; g < M; g++) {
      if (!observed[g]) continue;
      const d = c * M + g;
      for (let j = 0; j < K; j++) {
        const pj = fpca.eigenfunctions[j][d] * inv;
        for (let k = j; k < K; k++) A.set(j, k, A.get(j, k) + pj * fpca.eigenfunctions[k][d]);
      }
    }
  }
  for (let j = 0; j < K; j++) {
    A.set(j, j, A.get(j, j) + 1 / fpca.eigenvalues[j]);
    for (let k = j + 1; k < K; k++) A.set(k, j, A.get(j, k));
  }
  const S = inverse(A, true);
  const D = channels * M;
  const sd = new Float64Array(D);
  const phi = new Float64Array(K);
  for (let d = 0; d < D; d++) {
    for (let k = 0; k < K; k++) phi[k] = fpca.eigenfunctions[k][d];
    let v = nugget[Math.floor(d / M)];
    for (let j = 0; j < K; j++) {
      let row = 0;
      for (let k = 0; k < K; k++) row += S.get(j, k) * phi[k];
      v += phi[j] * row;
    }
    sd[d] = Math.sqrt(Math.max(v, 0));
  }
  return { S, sd };
}

/** The conditional mean of a curve given its observed grid points. */
function conditionalMean(fpca: FpcaModel, nugget: Float64Array, channels: number, M: number, observed: Uint8Array, S: Matrix, curve: Float64Array): Float64Array {
  const K = fpca.eigenvalues.length;
  const b = new Float64Array(K);
  for (let c = 0; c < channels; c++) {
    const inv = 1 / nugget[c];
    for (let g = 0; g < M; g++) {
      if (!observed[g]) continue;
      const d = c * M + g;
      const r = curve[d] - fpca.mean[d];
      for (let j = 0; j < K; j++) b[j] += fpca.eigenfunctions[j][d] * inv * r;
    }
  }
  const xi = new Float64Array(K);
  for (let j = 0; j < K; j++) for (let k = 0; k < K; k++) xi[j] += S.get(j, k) * b[k];
  const D = channels * M;
  const mean = new Float64Array(D);
  for (let d = 0; d < D; d++) {
    let m = fpca.mean[d];
    for (let k = 0; k < K; k++) m += fpca.eigenfunctions[k][d] * xi[k];
    mean[d] = m;
  }
  return mean;
}

/**
 * The band multiplier for this pattern of observed grid points, calibrated by cross-fitting (module
 * comment); the normal quantile when nothing is left unseen.
 */
export function calibratedMultiplier(model: ProjectionModel, observed: Uint8Array, level = 0.95): number {
  const key = `${level}:${observed.join('')}`;
  const known = model.multipliers.get(key);
  if (known !== undefined) return known;
  const z = crossFittedMultiplier(model, observed, level);
  if (model.multipliers.size >= MULTIPLIER_MEMO) model.multipliers.delete(model.multipliers.keys().next().value as string);
  model.multipliers.set(key, z);
  return z;
}

function crossFittedMultiplier(model: ProjectionModel, observed: Uint8Array, level: number): number {
  const { channels, gridSize: M } = model;
  const scores: number[] = [];
  for (const f of model.folds) {
    const { S, sd } = conditional(f.fpca, f.nugget, channels, M, observed);
    for (const x of f.held) {
      const m = conditionalMean(f.fpca, f.nugget, channels, M, observed, S, x);
      for (let c = 0; c < channels; c++) {
        for (let g = 0; g < M; g++) {
          if (observed[g]) continue;
          const d = c * M + g;
          if (sd[d] > 0) scores.push(Math.abs(x[d] - m[d]) / sd[d]);
        }
      }
    }
  }
  if (scores.length === 0) return normalQuantile(0.5 + level / 2);
  scores.sort((a, b) => a - b);
  const k = Math.min(scores.length, Math.ceil(level * (scores.length + 1)));
  return scores[k - 1];
}

export interface Projection {
  /** Conditional mean of the whole curve (channel blocks, physical units). */
  readonly mean: Float64Array;
  readonly lower: Float64Array;
  readonly upper: Float64Array;
  readonly level: number;
}

/** Project a partly observed curve; `observed` marks the grid points (per grid index) seen so far. */
export function projectRemainder(model: ProjectionModel, curve: Float64Array, observed: Uint8Array, level = 0.95): Projection {
  const { fpca, nugget, channels, gridSize: M } = model;
  const { S, sd } = conditional(fpca, nugget, channels, M, observed);
  const mean = conditionalMean(fpca, nugget, channels, M, observed, S, curve);
  const z = calibratedMultiplier(model, observed, level);
  const lower = Float64Array.from(mean, (m, d) => m - z * sd[d]);
  const upper = Float64Array.from(mean, (m, d) => m + z * sd[d]);
  return { mean, lower, upper, level };
}
