/**
 * Per-run p-value patterns for the sequential-evidence and advisor tests (invented data):
 *  - the null on the engine's lattice: p = k/(N + 1), k uniform on 1 … N + 1;
 *  - the null with the engine's dependence: every run of a vignette ranked against the SAME N
 *    simulated values (exchangeable, not independent, run p-values);
 *  - pools of overall p-values produced by the real engine (assessRun, engine/assess.ts) on the
 *    synthetic tracks of test/support/synthetic.ts with a built discrepancy;
 *  - Monte Carlo helpers: the run count of a fixed-sample Fisher design, runs to a crossing.
 */
import { assessRun, buildBaseline } from '../../engine/assess.js';
import { combinePValues } from '../../engine/combine.js';
import { createRng, type Rng } from '../../engine/rng.js';
import { SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, H, sampleBaseline, sampleTrack, type Discrepancy } from './synthetic.js';

/** N simulated runs per vignette in these tests; the lattice of the p-values is L = N + 1. */
export const N_SIMS = 200;
export const LATTICE = N_SIMS + 1;

/** A null p-value of the engine's form: k/(N + 1), k uniform on 1 … N + 1. */
export function latticeNull(rng: Rng, lattice = LATTICE): number {
  return (1 + rng.int(lattice)) / lattice;
}

/**
 * A vignette under the null as the engine sees it: N simulated statistics drawn once, then each live
 * run's statistic ranked against them, p = (1 + #{sim ≥ live})/(N + 1) (continuous statistics, so
 * the rank law is that of any exchangeable set).
 */
export function sharedBaselineNull(rng: Rng, n = N_SIMS): () => number {
  const sims = Float64Array.from({ length: n }, () => rng.uniform()).sort();
  return () => {
    const u = rng.uniform();
    // #{sim ≥ u} by binary search on the sorted sims.
    let lo = 0;
    let hi = n;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (sims[mid] < u) lo = mid + 1;
      else hi = mid;
    }
    return (1 + (n - lo)) / (n + 1);
  };
}

const channels = SYNTHETIC_CHANNELS;
const settings = SYNTHETIC_SETTINGS;

/**
 * Overall p-values of `size` live runs with a built discrepancy, each judged by the real engine
 * (assessRun) against one baseline of N_SIMS synthetic simulated runs: a vignette's runs in an event.
 */
export function enginePool(discrepancy: Discrepancy, size: number, seed: number): number[] {
  const rng = createRng(seed);
  const baseline = buildBaseline('V', H, channels, sampleBaseline(rng.fork(), N_SIMS), settings);
  const live = rng.fork();
  return Array.from({ length: size }, (_, i) => assessRun(baseline, sampleTrack(live, `live-${i}`, { discrepancy })).result.pValues.overall);
}

/** Resample a pool (with replacement). */
export function poolSampler(pool: readonly number[], rng: Rng): () => number {
  return () => pool[rng.int(pool.length)];
}

/** Smallest n with P(Fisher p ≤ alpha) ≥ power for n runs drawn by `draw` (reps runs each n). */
export function fisherDesignRuns(draw: () => number, alpha: number, power: number, reps: number, maxRuns: number): { runs: number | null; power: number } {
  for (let n = 1; n <= maxRuns; n++) {
    let hits = 0;
    for (let r = 0; r < reps; r++) {
      if (combinePValues(Array.from({ length: n }, draw), 'fisher').pValue <= alpha) hits++;
    }
    if (hits / reps >= power) return { runs: n, power: hits / reps };
  }
  return { runs: null, power: Number.NaN };
}

/** The first k ≤ maxRuns at which Fisher's p of the first k runs is ≤ alpha (re-tested after every run), or null. */
export function fisherRetestedCrossing(ps: readonly number[], alpha: number): number | null {
  for (let k = 1; k <= ps.length; k++) if (combinePValues(ps.slice(0, k), 'fisher').pValue <= alpha) return k;
  return null;
}

export function quantile(sorted: readonly number[], q: number): number {
  return sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil(q * sorted.length) - 1))];
}
