/**
 * Evidence across runs, statistic by statistic, and one decision from the three.
 *
 * Each statistic's per-run p-values (l2, score, residual; smoothed, so uniform on (0, 1) under the
 * null, ./calibrate.ts) are combined across the runs by the plan's method (./combine.ts). A
 * discrepancy that only one statistic sees (a change of shape seen by the score alone) keeps its
 * full strength there, where combining each run's overall p-value would dilute it.
 *
 * The decision uses the smallest of the three combined p-values, calibrated by Monte Carlo with the
 * simulated runs as pseudo-live runs (the min-p method, Westfall & Young, "Resampling-Based
 * Multiple Testing", Wiley 1993, §2.6): a null live run's triple of p-values is distributed like a
 * simulated run's own triple in the same window (`nullPValues` of ./calibrate.ts), which keeps the
 * dependence between the three statistics. Draw b picks, for every run, one simulated run of its
 * window at random and combines their triples; with T the largest of the three combined scores
 * (the same monotone map for each statistic, since all three combine the same number of runs),
 *     p_MC = (1 + #{b : T_b ≥ T_obs}) / (B + 1)
 * (Monte Carlo p-value, Davison & Hinkley, "Bootstrap Methods and their Application", CUP 1997,
 * §4.2.1). When no draw reaches T_obs, the reported value is min(1/(B + 1), 3·min_s p_s), the
 * Bonferroni bound: at α ≥ 1/(B + 1) the rejections are exactly those of p_MC, below it they are
 * a subset of Bonferroni's, so the reported value is valid at every level and still resolves
 * values smaller than the Monte Carlo floor.
 *
 * The draws come from a generator seeded by the plan's seed and a label: the same event gives the
 * same value everywhere.
 */
import { STATISTICS, type PerStatistic, type StatisticName } from './calibrate.js';
import { cauchyTerm, combinePValues, type Combined } from './combine.js';
import { normalQuantile } from './normal.js';
import { createRng, seedFor } from './rng.js';
import type { CombinationMethod } from './types.js';

/** Default number of Monte Carlo draws of the calibration. */
export const DEFAULT_DRAWS = 9999;

export interface RunPValues {
  readonly pValues: PerStatistic<number>;
  /** The simulated runs' own triples in the run's window (each array one value per simulated run). */
  readonly nullPValues: PerStatistic<ArrayLike<number>>;
}

export interface StatisticsCombined extends Combined {
  /** Each statistic combined across the runs by `method`. */
  readonly byStatistic: PerStatistic<Combined>;
  /** The statistic with the smallest combined p-value. */
  readonly leading: StatisticName;
  /** Monte Carlo draws behind `pValue`, and whether the Bonferroni bound was used (no draw reached). */
  readonly draws: number;
  readonly bound: boolean;
}

/** The per-run score whose sum (or maximum, for Tippett) is monotone in the combined p-value. */
function scoreOf(method: CombinationMethod): (p: number) => number {
  switch (method) {
    case 'fisher':
      return (p) => -2 * Math.log(p);
    case 'stouffer':
      return (p) => -normalQuantile(p);
    case 'cauchy':
      return cauchyTerm;
    case 'tippett':
      return (p) => -p;
  }
}

const scoreCache = new WeakMap<ArrayLike<number>, Map<CombinationMethod, Float64Array>>();

/** Scores of a null array, cached per array (windows are shared by many runs). */
function nullScores(values: ArrayLike<number>, method: CombinationMethod): Float64Array {
  let byMethod = scoreCache.get(values);
  if (!byMethod) {
    byMethod = new Map();
    scoreCache.set(values, byMethod);
  }
  let out = byMethod.get(method);
  if (!out) {
    const f = scoreOf(method);
    out = Float64Array.from({ length: values.length }, (_, i) => f(values[i]));
    byMethod.set(method, out);
  }
  return out;
}

/**
 * Combine every statistic across `runs` and calibrate the smallest combined p-value (module
 * comment). `label` names the family (e.g. 'event' or a vignette id) for the seed of the draws.
 */
export function combineStatistics(
  runs: readonly RunPValues[],
  method: CombinationMethod,
  seed: number,
  label: string,
  draws: number = DEFAULT_DRAWS,
): StatisticsCombined {
  if (runs.length === 0) throw new RangeError('combineStatistics: no runs to combine');
  if (!Number.isInteger(draws) || draws < 1) throw new RangeError(`combineStatistics: draws must be a positive integer, got ${draws}`);
  const byStatistic = {
    l2: combinePValues(runs.map((r) => r.pValues.l2), method),
    score: combinePValues(runs.map((r) => r.pValues.score), method),
    residual: combinePValues(runs.map((r) => r.pValues.residual), method),
  };
  let leading: StatisticName = 'l2';
  for (const s of STATISTICS) if (byStatistic[s].pValue < byStatistic[leading].pValue) leading = s;
  const minP = byStatistic[leading].pValue;

  const f = scoreOf(method);
  const sum = method !== 'tippett';
  const aggregate = (values: readonly number[]): number => (sum ? values.reduce((a, b) => a + b, 0) : Math.max(...values));
  let observed = -Infinity;
  for (const s of STATISTICS) observed = Math.max(observed, aggregate(runs.map((r) => f(r.pValues[s]))));

  const tables = runs.map((r) => {
    const n = r.nullPValues.l2.length;
    if (n < 1 || r.nullPValues.score.length !== n || r.nullPValues.residual.length !== n) {
      throw new RangeError('combineStatistics: every run needs the same number of null p-values for each statistic');
    }
    return { n, l2: nullScores(r.nullPValues.l2, method), score: nullScores(r.nullPValues.score, method), residual: nullScores(r.nullPValues.residual, method) };
  });
  const rng = createRng(seedFor(seed, 'combine-statistics', label, String(runs.length)));
  let reached = 0;
  for (let b = 0; b < draws; b++) {
    let a0 = sum ? 0 : -Infinity;
    let a1 = a0;
    let a2 = a0;
    for (const t of tables) {
      const j = rng.int(t.n);
      if (sum) {
        a0 += t.l2[j];
        a1 += t.score[j];
        a2 += t.residual[j];
      } else {
        a0 = Math.max(a0, t.l2[j]);
        a1 = Math.max(a1, t.score[j]);
        a2 = Math.max(a2, t.residual[j]);
      }
    }
    if (Math.max(a0, a1, a2) >= observed) reached++;
  }
  const bound = reached === 0;
  const pValue = bound ? Math.min(1 / (draws + 1), Math.min(1, 3 * minP)) : (1 + reached) / (draws + 1);
  return { method, statistic: minP, pValue, count: runs.length, byStatistic, leading, draws, bound };
}
