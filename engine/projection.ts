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
 * The band is x̂ ± z·sd with z the normal quantile of the level. Everything is in physical units.
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
}

/** Fit the projection model on the simulated runs' full-window curves (channel blocks of M). */
export function fitProjectionModel(curves: readonly Float64Array[], gridWeights: Float64Array, channels: number, seed = 0x5eed): ProjectionModel {
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
  return { fpca, nugget, channels, gridSize: M };
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
  const K = fpca.eigenvalues.length;
  const A = new Matrix(K, K);
  const b = new Float64Array(K);
  for (let c = 0; c < channels; c++) {
    const inv = 1 / nugget[c];
    for (let g = 0; g < M; g++) {
      if (!observed[g]) continue;
      const d = c * M + g;
      const r = curve[d] - fpca.mean[d];
      for (let j = 0; j < K; j++) {
        const pj = fpca.eigenfunctions[j][d] * inv;
        b[j] += pj * r;
        for (let k = j; k < K; k++) A.set(j, k, A.get(j, k) + pj * fpca.eigenfunctions[k][d]);
      }
    }
  }
  for (let j = 0; j < K; j++) {
    A.set(j, j, A.get(j, j) + 1 / fpca.eigenvalues[j]);
    for (let k = j + 1; k < K; k++) A.set(k, j, A.get(j, k));
  }
  const S = inverse(A, true);
  const xi = new Float64Array(K);
  for (let j = 0; j < K; j++) for (let k = 0; k < K; k++) xi[j] += S.get(j, k) * b[k];
  const z = normalQuantile(0.5 + level / 2);
  const D = channels * M;
  const mean = new Float64Array(D);
  const lower = new Float64Array(D);
  const upper = new Float64Array(D);
  const phi = new Float64Array(K);
  for (let d = 0; d < D; d++) {
    let m = fpca.mean[d];
    for (let k = 0; k < K; k++) {
      phi[k] = fpca.eigenfunctions[k][d];
      m += phi[k] * xi[k];
    }
    let v = nugget[Math.floor(d / M)];
    for (let j = 0; j < K; j++) {
      let row = 0;
      for (let k = 0; k < K; k++) row += S.get(j, k) * phi[k];
      v += phi[j] * row;
    }
    const sd = Math.sqrt(Math.max(v, 0));
    mean[d] = m;
    lower[d] = m - z * sd;
    upper[d] = m + z * sd;
  }
  return { mean, lower, upper, level };
}
