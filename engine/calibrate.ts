/**
 * Exactly valid per-run p-values: the live curve against the simulated ones by three statistics
 * and their calibrated minimum.
 *
 * Statistics of a curve x under an FPCA model (./fpca.ts) with mean m, eigenpairs (λ_k, φ_k), K kept:
 *   l2       = ‖x − m‖                                   (distance from the mean track)
 *   score    = (Σ_{k≤K} ξ_k² / λ_k)^{1/2}                 (Mahalanobis distance on the scores)
 *   residual = (‖x − m‖² − Σ_{k≤K} ξ_k²)^{1/2}           (what the kept components miss)
 * Channels are joined after dividing each by its scale s_c, the root of its pointwise variance
 * averaged over the judged window (so every channel weighs the same whatever its unit).
 *
 * Calibration is full conformal (Vovk, Gammerman & Shafer, "Algorithmic Learning in a Random
 * World", Springer 2005, ch. 2; Lei, G'Sell, Rinaldo, Tibshirani & Wasserman, JASA 113:1094–1111,
 * 2018, doi:10.1080/01621459.2017.1307116): the live curve is pooled with the N simulated curves,
 * ONE model (scales, mean, components, their number) is fitted to all N + 1, and every curve's
 * statistic is computed in that same fit. The statistic map is symmetric in the N + 1 curves, so
 * under the null (the live run is one more draw from the simulation) the live statistic is
 * exchangeable with the simulated ones and the rank p-value
 *     p = (1 + #{i ≤ N : S_i ≥ S_live}) / (N + 1)
 * satisfies P(p ≤ α) ≤ α exactly, for every N. A live statistic computed out of sample against
 * in-sample simulated statistics (fit on the simulations, project the live curve) breaks this
 * symmetry and inflates false alarms; test/engine/calibrate.test.ts shows both.
 *
 * Overall verdict: for each of the N + 1 curves, the smallest of its three rank p-values; the live
 * curve's overall p-value is the rank of its minimum among all N + 1 minima (the min-p method with
 * its null distribution taken from the same exchangeable set, Westfall & Young, "Resampling-Based
 * Multiple Testing", Wiley 1993, §2.6), so using three statistics does not inflate the error rate.
 */
import { fitFpca, type FpcaModel, type FpcaSolver } from './fpca.js';
import type { ComponentRule } from './types.js';

export const STATISTICS = ['l2', 'score', 'residual'] as const;
export type StatisticName = (typeof STATISTICS)[number];

export interface StatisticValues {
  readonly l2: number;
  readonly score: number;
  readonly residual: number;
}

export interface ConformalResult {
  /** The live curve's statistics (distances in scaled units). */
  readonly live: StatisticValues;
  readonly pValues: StatisticValues & { readonly overall: number };
  /** The simulated curves' statistics in the same fit, one entry per simulated curve. */
  readonly reference: { readonly l2: Float64Array; readonly score: Float64Array; readonly residual: Float64Array };
  /** The model fitted to the N + 1 curves (live curve last). */
  readonly model: FpcaModel;
  /** Per-channel scale s_c used to join the channels. */
  readonly channelScales: Float64Array;
}

export interface ConformalOptions {
  readonly solver?: FpcaSolver;
  readonly seed?: number;
}

/**
 * Per-channel scale: sqrt of the pointwise variance across curves, averaged over the grid with
 * weights `gridWeights`. Curves hold `channels` blocks of `gridWeights.length` values.
 */
export function channelScales(curves: readonly Float64Array[], gridWeights: Float64Array, channels: number): Float64Array {
  const M = gridWeights.length;
  const N = curves.length;
  const scales = new Float64Array(channels);
  let wsum = 0;
  for (let g = 0; g < M; g++) wsum += gridWeights[g];
  for (let c = 0; c < channels; c++) {
    let acc = 0;
    for (let g = 0; g < M; g++) {
      const w = gridWeights[g];
      if (w === 0) continue;
      const d = c * M + g;
      let mean = 0;
      for (let i = 0; i < N; i++) mean += curves[i][d];
      mean /= N;
      let v = 0;
      for (let i = 0; i < N; i++) {
        const r = curves[i][d] - mean;
        v += r * r;
      }
      acc += (w * v) / (N - 1);
    }
    const s = Math.sqrt(acc / wsum);
    scales[c] = s > 0 && Number.isFinite(s) ? s : 1;
  }
  return scales;
}

/** Weights of the joined curve: grid weight / s_c² on channel c's block. */
export function joinedWeights(gridWeights: Float64Array, scales: Float64Array): Float64Array {
  const M = gridWeights.length;
  const out = new Float64Array(M * scales.length);
  for (let c = 0; c < scales.length; c++) {
    const f = 1 / (scales[c] * scales[c]);
    for (let g = 0; g < M; g++) out[c * M + g] = gridWeights[g] * f;
  }
  return out;
}

/** In-sample statistics of every curve of a fitted model. */
export function inSampleStatistics(model: FpcaModel, curves: readonly Float64Array[]): { l2: Float64Array; score: Float64Array; residual: Float64Array } {
  const N = curves.length;
  const D = model.weights.length;
  const K = model.eigenvalues.length;
  const l2 = new Float64Array(N);
  const score = new Float64Array(N);
  const residual = new Float64Array(N);
  for (let i = 0; i < N; i++) {
    const x = curves[i];
    let l2sq = 0;
    for (let d = 0; d < D; d++) {
      const r = x[d] - model.mean[d];
      l2sq += model.weights[d] * r * r;
    }
    let explained = 0;
    let maha = 0;
    const s = model.scores[i];
    for (let k = 0; k < K; k++) {
      explained += s[k] * s[k];
      maha += (s[k] * s[k]) / model.eigenvalues[k];
    }
    l2[i] = Math.sqrt(l2sq);
    score[i] = Math.sqrt(maha);
    residual[i] = Math.sqrt(Math.max(0, l2sq - explained));
  }
  return { l2, score, residual };
}

/** Monte Carlo rank p-value (1 + #{reference ≥ value}) / (N + 1). */
export function rankPValue(reference: ArrayLike<number>, value: number): number {
  let count = 0;
  for (let i = 0; i < reference.length; i++) if (reference[i] >= value) count++;
  return (1 + count) / (reference.length + 1);
}

/** For every element, #{j : v_j ≥ v_i} / n (each element's rank p-value within the whole set). */
function selfRankPValues(values: Float64Array): Float64Array {
  const n = values.length;
  const order = Array.from({ length: n }, (_, i) => i).sort((a, b) => values[b] - values[a]);
  const out = new Float64Array(n);
  let i = 0;
  while (i < n) {
    let j = i;
    while (j + 1 < n && values[order[j + 1]] === values[order[i]]) j++;
    for (let k = i; k <= j; k++) out[order[k]] = (j + 1) / n;
    i = j + 1;
  }
  return out;
}

/**
 * Assess one live curve against N simulated curves (same grid, same window) by full conformal
 * calibration, as described in the module comment.
 */
export function conformalAssess(
  sims: readonly Float64Array[],
  live: Float64Array,
  gridWeights: Float64Array,
  channels: number,
  rule: ComponentRule,
  options: ConformalOptions = {},
): ConformalResult {
  const N = sims.length;
  if (N < 2) throw new RangeError(`conformalAssess: need at least 2 simulated curves, got ${N}`);
  const all = [...sims, live];
  const scales = channelScales(all, gridWeights, channels);
  const weights = joinedWeights(gridWeights, scales);
  const model = fitFpca(all, weights, rule, { solver: options.solver, seed: options.seed });
  const stats = inSampleStatistics(model, all);
  const pv = {
    l2: selfRankPValues(stats.l2),
    score: selfRankPValues(stats.score),
    residual: selfRankPValues(stats.residual),
  };
  const minP = new Float64Array(N + 1);
  for (let i = 0; i <= N; i++) minP[i] = Math.min(pv.l2[i], pv.score[i], pv.residual[i]);
  let overallCount = 0;
  for (let i = 0; i <= N; i++) if (minP[i] <= minP[N]) overallCount++;
  return {
    live: { l2: stats.l2[N], score: stats.score[N], residual: stats.residual[N] },
    pValues: { l2: pv.l2[N], score: pv.score[N], residual: pv.residual[N], overall: overallCount / (N + 1) },
    reference: { l2: stats.l2.subarray(0, N), score: stats.score.subarray(0, N), residual: stats.residual.subarray(0, N) },
    model,
    channelScales: scales,
  };
}
