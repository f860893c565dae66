/**
 * Valid per-run p-values: the live curve against the simulated ones by three statistics and their
 * calibrated minimum, every curve judged out of sample.
 *
 * Statistics of a curve x under an FPCA model (./fpca.ts) with mean m, eigenpairs (λ_k, φ_k), K kept:
 *   l2       = ‖x − m‖                                   (distance from the mean track)
 *   score    = (Σ_{k≤K} ξ_k² / λ_k)^{1/2}                 (Mahalanobis distance on the scores)
 *   residual = (‖x − m‖² − Σ_{k≤K} ξ_k²)^{1/2}           (what the kept components miss)
 * Channels are joined after dividing each by its scale s_c, the root of its pointwise variance
 * averaged over the judged window (so every channel weighs the same whatever its unit).
 *
 * Calibration: jackknife (leave-one-out) conformal scores. One model is fitted to the N simulated
 * curves of the judged window (scales, mean, components; the number K of components is fixed by
 * that model alone). The live curve is scored against it. Each simulated curve i is scored against
 * the model of the other N − 1 simulated curves with the same K (./loo.ts: exact rank-one downdates
 * of one eigendecomposition). So no curve's statistic comes from a model it shaped: a live run with
 * a large deviation cannot pull a component towards itself and hide in it, which is what the
 * earlier pooled fit of N + 1 curves allowed (kept below as `pooledConformalAssess` for comparison).
 * The simulated curves' statistics depend only on the baseline and the window: they are computed
 * once per window (`buildReference`) and shared by every run judged on it.
 *
 * Validity (Barber, Candès, Ramdas & Tibshirani, "Predictive inference with the jackknife+",
 * Ann. Statist. 49(1):486–507, 2021, doi:10.1214/20-AOS1965). The live statistic comes from a model
 * of N curves, each simulated one from a model of N − 1; the two differ by one curve in N. The
 * jackknife has no distribution-free guarantee of its own; Barber et al. (§5) bound its excess
 * error by the algorithm's out-of-sample stability, which a mean and a covariance of N curves have
 * at rate O(1/N); the test suite measures the level directly (2,000 null repetitions per statistic,
 * test/engine/calibrate.test.ts). Its jackknife+ version (live and simulated curve compared in the
 * same model of N − 1 curves) has the distribution-free bound P(p ≤ α) ≤ 2α (their Theorem 1).
 *
 * Smoothed p-values (Vovk, Gammerman & Shafer, "Algorithmic Learning in a Random World",
 * Springer 2005, §2.4): p = (#{i : S_i > S} + U·(1 + #{i : S_i = S})) / (N + 1), U uniform on (0, 1],
 * is exactly uniform on (0, 1) under exchangeability, ties or not, where the plain rank
 * (1 + #{S_i ≥ S}) / (N + 1) is conservative whenever values tie. Every U comes from a generator
 * seeded by the plan's seed and the run's name (./rng.ts `seedFor`), so the same event gives the
 * same p-values in every process and on every rerun.
 *
 * Overall verdict (min-p, Westfall & Young, "Resampling-Based Multiple Testing", Wiley 1993, §2.6):
 * every one of the N + 1 curves gets its three smoothed p-values among all N + 1 statistics (each
 * simulated curve with its own U), its minimum, and the live curve's overall p-value is the
 * smoothed rank of its minimum among the N + 1 minima. Under the null the live curve's minimum is
 * exchangeable with the others, so looking at three statistics does not inflate false alarms, and
 * with smoothed ranks the level is nominal rather than conservative.
 */
import { fitFpca, fitFpcaFull, projectCurve, type FpcaModel, type FpcaSolver } from './fpca.js';
import { leaveOneOutStatistics } from './loo.js';
import { createRng, seedFor } from './rng.js';
import type { ComponentRule } from './types.js';

export const STATISTICS = ['l2', 'score', 'residual'] as const;
export type StatisticName = (typeof STATISTICS)[number];

export interface StatisticValues {
  readonly l2: number;
  readonly score: number;
  readonly residual: number;
}

export type PerStatistic<T> = { readonly l2: T; readonly score: T; readonly residual: T };

export interface ConformalResult {
  /** The live curve's statistics (distances in scaled units). */
  readonly live: StatisticValues;
  /** Smoothed p-values (module comment): each uniform on (0, 1) under the null. */
  readonly pValues: StatisticValues & { readonly overall: number };
  /** The simulated curves' leave-one-out statistics, one entry per simulated curve. */
  readonly reference: PerStatistic<Float64Array>;
  /**
   * Each simulated curve's own smoothed p-values among the N simulated curves: what a null run's
   * p-values look like in this window, for calibrating combinations across runs (./event.ts).
   */
  readonly nullPValues: PerStatistic<Float64Array>;
  /** The model fitted to the N simulated curves. */
  readonly model: FpcaModel;
  /** The live curve's scores on the model's components. */
  readonly liveScores: Float64Array;
  /** Per-channel scale s_c used to join the channels. */
  readonly channelScales: Float64Array;
}

export interface ConformalOptions {
  readonly solver?: FpcaSolver;
  /** Seed of the simulated curves' tie-breaking draws (and of the randomized solver where used). */
  readonly seed?: number;
  /** Seed of the live run's tie-breaking draws; name the run (./rng.ts seedFor). */
  readonly tieSeed?: number;
  /** The window's reference, when the caller has it cached (`buildReference`). */
  readonly reference?: CalibrationReference;
}

/** Default seed of the tie-breaking draws when the plan gives none. */
export const DEFAULT_TIE_SEED = 1;

/**
 * What the simulated curves of one window contribute to every run judged on it: their model, their
 * leave-one-out statistics, and their tie-breaking draws. Depends on the baseline and the window only.
 */
export interface CalibrationReference {
  readonly n: number;
  readonly model: FpcaModel;
  readonly channelScales: Float64Array;
  readonly statistics: PerStatistic<Float64Array>;
  /** Each statistic sorted ascending (for counting by binary search). */
  readonly sorted: PerStatistic<Float64Array>;
  /** #{j ≠ i : S_j > S_i} and #{j ≠ i : S_j = S_i} among the simulated curves. */
  readonly above: PerStatistic<Int32Array>;
  readonly ties: PerStatistic<Int32Array>;
  /** U_i in (0, 1] per simulated curve and statistic. */
  readonly draws: PerStatistic<Float64Array>;
  readonly nullPValues: PerStatistic<Float64Array>;
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

/** Number of elements of the ascending array `a` that are < v (lower) or <= v (upper). */
function bound(a: Float64Array, v: number, upper: boolean): number {
  let lo = 0;
  let hi = a.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (a[mid] < v || (upper && a[mid] === v)) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

function perStatistic<T>(f: (s: StatisticName) => T): PerStatistic<T> {
  return { l2: f('l2'), score: f('score'), residual: f('residual') };
}

/**
 * The window's reference: the model of the N simulated curves (exact solver, K by `rule`), every
 * simulated curve's leave-one-out statistics with the same K, their counts above and tied, their
 * tie-breaking draws (seeded by `seed`), and their own smoothed p-values among the N.
 */
export function buildReference(
  sims: readonly Float64Array[],
  gridWeights: Float64Array,
  channels: number,
  rule: ComponentRule,
  seed: number = DEFAULT_TIE_SEED,
): CalibrationReference {
  const N = sims.length;
  if (N < 4) throw new RangeError(`buildReference: need at least 4 simulated curves, got ${N}`);
  const scales = channelScales(sims, gridWeights, channels);
  const weights = joinedWeights(gridWeights, scales);
  // Every leave-one-out model needs K ≤ N − 3 components (N − 1 curves, at most N − 3 kept).
  const full = fitFpcaFull(sims, weights, rule, { maxComponents: N - 3 });
  const K = full.model.eigenvalues.length;
  const statistics = leaveOneOutStatistics(full, K);
  const rng = createRng(seedFor(seed, 'simulated-draws', String(N)));
  const draws = perStatistic(() => Float64Array.from({ length: N }, () => 1 - rng.uniform()));
  const sorted = perStatistic((s) => Float64Array.from(statistics[s]).sort());
  const above = perStatistic((s) => Int32Array.from(statistics[s], (v) => N - bound(sorted[s], v, true)));
  const ties = perStatistic((s) => Int32Array.from(statistics[s], (v) => bound(sorted[s], v, true) - bound(sorted[s], v, false) - 1));
  const nullPValues = perStatistic((s) => Float64Array.from(statistics[s], (_, i) => (above[s][i] + draws[s][i] * (1 + ties[s][i])) / N));
  return { n: N, model: full.model, channelScales: scales, statistics, sorted, above, ties, draws, nullPValues };
}

/** Judge one live curve against a window's reference (module comment). */
export function judgeAgainst(reference: CalibrationReference, live: Float64Array, tieSeed: number = DEFAULT_TIE_SEED): ConformalResult {
  const N = reference.n;
  const proj = projectCurve(reference.model, live);
  const values: StatisticValues = {
    l2: Math.sqrt(proj.l2sq),
    score: Math.sqrt(proj.mahalanobisSq),
    residual: Math.sqrt(proj.residualSq),
  };
  const rng = createRng(seedFor(tieSeed, 'live-draws'));
  const liveDraw = perStatistic(() => 1 - rng.uniform());
  const overallDraw = 1 - rng.uniform();
  const pLive = perStatistic((s) => {
    const v = values[s];
    const lower = bound(reference.sorted[s], v, false);
    const upper = bound(reference.sorted[s], v, true);
    return (N - upper + liveDraw[s] * (1 + upper - lower)) / (N + 1);
  });
  const minLive = Math.min(pLive.l2, pLive.score, pLive.residual);
  // Each simulated curve's smoothed p-values among all N + 1 statistics, and their minimum.
  let below = 0;
  let tied = 0;
  for (let i = 0; i < N; i++) {
    let m = Infinity;
    for (const s of STATISTICS) {
      const si = reference.statistics[s][i];
      const v = values[s];
      const p = (reference.above[s][i] + (v > si ? 1 : 0) + reference.draws[s][i] * (1 + reference.ties[s][i] + (v === si ? 1 : 0))) / (N + 1);
      if (p < m) m = p;
    }
    if (m < minLive) below++;
    else if (m === minLive) tied++;
  }
  const overall = (below + overallDraw * (1 + tied)) / (N + 1);
  return {
    live: values,
    pValues: { ...pLive, overall },
    reference: reference.statistics,
    nullPValues: reference.nullPValues,
    model: reference.model,
    liveScores: proj.scores,
    channelScales: reference.channelScales,
  };
}

/**
 * Assess one live curve against N simulated curves (same grid, same window) by leave-one-out
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
  if (N < 4) throw new RangeError(`conformalAssess: need at least 4 simulated curves, got ${N}`);
  const reference = options.reference ?? buildReference(sims, gridWeights, channels, rule, options.seed ?? DEFAULT_TIE_SEED);
  if (reference.n !== N) throw new RangeError(`conformalAssess: the reference holds ${reference.n} curves, ${N} were given`);
  return judgeAgainst(reference, live, options.tieSeed ?? DEFAULT_TIE_SEED);
}

/**
 * The earlier calibration, kept to measure what the leave-one-out one changes (the benchmark and
 * test/engine/calibrate.test.ts): one model fitted to all N + 1 curves, every statistic in sample,
 * plain ranks (ties counted against the live curve). Exactly valid by symmetry but it lets a
 * deviating live curve shape the components it is judged by.
 */
export function pooledConformalAssess(
  sims: readonly Float64Array[],
  live: Float64Array,
  gridWeights: Float64Array,
  channels: number,
  rule: ComponentRule,
  options: { solver?: FpcaSolver; seed?: number } = {},
): { live: StatisticValues; pValues: StatisticValues & { overall: number } } {
  const N = sims.length;
  if (N < 2) throw new RangeError(`pooledConformalAssess: need at least 2 simulated curves, got ${N}`);
  const all = [...sims, live];
  const scales = channelScales(all, gridWeights, channels);
  const weights = joinedWeights(gridWeights, scales);
  const model = fitFpca(all, weights, rule, { solver: options.solver, seed: options.seed });
  const stats = inSampleStatistics(model, all);
  const pv = { l2: selfRankPValues(stats.l2), score: selfRankPValues(stats.score), residual: selfRankPValues(stats.residual) };
  const minP = new Float64Array(N + 1);
  for (let i = 0; i <= N; i++) minP[i] = Math.min(pv.l2[i], pv.score[i], pv.residual[i]);
  let overallCount = 0;
  for (let i = 0; i <= N; i++) if (minP[i] <= minP[N]) overallCount++;
  return {
    live: { l2: stats.l2[N], score: stats.score[N], residual: stats.residual[N] },
    pValues: { l2: pv.l2[N], score: pv.score[N], residual: pv.residual[N], overall: overallCount / (N + 1) },
  };
}
