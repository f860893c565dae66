/**
 * Runs to a decision, sequential evidence against a fixed-sample Fisher design, on p-values made by
 * the real engine (engine/assess.ts on the synthetic tracks of ./synthetic.ts). Shared by
 * test/engine/evidence.test.ts (checks) and test/bench/evidence.bench.ts (`npm run bench:evidence`,
 * figures). Invented data, seeded.
 *
 * Per-run p-values: for each statistic (l2, score, residual) the smoothed conformal p-value
 *     p = (#{i : S_i > S} + U · (1 + #{i : S_i = S})) / (N + 1),   U ~ Uniform(0, 1) independent,
 * computed from the live statistic S and the N simulated ones S_i in the same full-conformal fit
 * (Vovk, Gammerman & Shafer, "Algorithmic Learning in a Random World", Springer 2005, ch. 2,
 * smoothed conformal predictors): exactly Uniform(0, 1) under the null. The overall p-value is the
 * engine's own (the min-p rank of engine/calibrate.ts), which its fixed-sample Fisher verdict uses.
 */
import { assessRun, buildBaseline } from '../../engine/assess.js';
import { combinePValues } from '../../engine/combine.js';
import { createRng, type Rng } from '../../engine/rng.js';
import { H, SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, sampleBaseline, sampleTrack, type Discrepancy } from './synthetic.js';

/** One judged run: its three smoothed per-statistic p-values and the engine's overall p-value. */
export interface RunPValues {
  readonly l2: number;
  readonly score: number;
  readonly residual: number;
  readonly p: number;
}

/** Smoothed conformal p-value of `value` among `reference` (module comment). */
export function smoothedPValue(reference: ArrayLike<number>, value: number, u: number): number {
  let greater = 0;
  let equal = 0;
  for (let i = 0; i < reference.length; i++) {
    if (reference[i] > value) greater++;
    else if (reference[i] === value) equal++;
  }
  return (greater + u * (1 + equal)) / (reference.length + 1);
}

/**
 * `size` live runs with a built discrepancy, each judged by the engine against one baseline of
 * `sims` synthetic simulated runs (one vignette of an event). U is drawn from its own stream, so the
 * pool does not depend on how the engine uses randomness.
 */
export function statisticPool(discrepancy: Discrepancy, size: number, seed: number, sims = 200): RunPValues[] {
  const rng = createRng(seed);
  const baseline = buildBaseline('V', H, SYNTHETIC_CHANNELS, sampleBaseline(rng.fork(), sims), SYNTHETIC_SETTINGS);
  const live = rng.fork();
  const smoothing = rng.fork();
  return Array.from({ length: size }, (_, i) => {
    const r = assessRun(baseline, sampleTrack(live, `live-${i}`, { discrepancy })).result;
    return {
      l2: smoothedPValue(r.reference.l2, r.live.l2, smoothing.uniform()),
      score: smoothedPValue(r.reference.score, r.live.score, smoothing.uniform()),
      residual: smoothedPValue(r.reference.residual, r.live.residual, smoothing.uniform()),
      p: r.pValues.overall,
    };
  });
}

/** Share of a pool's runs with p ≤ alpha, per statistic and overall. */
export function singleRunPower(pool: readonly RunPValues[], alpha: number): RunPValues {
  const share = (f: (r: RunPValues) => number): number => pool.filter((r) => f(r) <= alpha).length / pool.length;
  return { l2: share((r) => r.l2), score: share((r) => r.score), residual: share((r) => r.residual), p: share((r) => r.p) };
}

/**
 * Smallest n with P(reject) ≥ power for a fixed design of n runs drawn with replacement from the pool,
 * estimated from `reps` designs per n (null if none up to maxRuns). Designs:
 *  - 'fisher-overall': Fisher's method on the n overall p-values, reject at p ≤ α (the engine's
 *    fixed-sample verdict);
 *  - 'fisher-bonferroni': Fisher's method per statistic, reject when the smallest of the three is
 *    ≤ α/3 (a fixed design that uses the same three p-values per run as the sequential evidence).
 */
export function fixedDesignRuns(
  pool: readonly RunPValues[],
  design: 'fisher-overall' | 'fisher-bonferroni',
  alpha: number,
  power: number,
  reps: number,
  maxRuns: number,
  seed: number,
): { runs: number | null; power: number } {
  const rng = createRng(seed);
  for (let n = 1; n <= maxRuns; n++) {
    let hits = 0;
    for (let r = 0; r < reps; r++) {
      const runs = Array.from({ length: n }, () => pool[rng.int(pool.length)]);
      if (design === 'fisher-overall') {
        if (combinePValues(runs.map((x) => x.p), 'fisher').pValue <= alpha) hits++;
      } else {
        const ps = (['l2', 'score', 'residual'] as const).map((s) => combinePValues(runs.map((x) => x[s]), 'fisher').pValue);
        if (Math.min(...ps) <= alpha / 3) hits++;
      }
    }
    if (hits / reps >= power) return { runs: n, power: hits / reps };
  }
  return { runs: null, power: Number.NaN };
}

export interface RunsToDecision {
  readonly mean: number;
  /** Standard error of the mean over the repetitions. */
  readonly se: number;
  readonly median: number;
  readonly q80: number;
  /** Share of repetitions that reached the threshold within the cap. */
  readonly reached: number;
}

/**
 * E[runs until the evidence first reaches its threshold] over `reps` sequences drawn with
 * replacement from the pool; `crossing` returns the 1-based run of the crossing or null (counted
 * as `cap`, so the mean is a lower bound when some sequences do not cross).
 */
export function runsToDecision(pool: readonly RunPValues[], crossing: (runs: RunPValues[]) => number | null, reps: number, cap: number, rng: Rng): RunsToDecision {
  const taus: number[] = [];
  let reached = 0;
  for (let r = 0; r < reps; r++) {
    const t = crossing(Array.from({ length: cap }, () => pool[rng.int(pool.length)]));
    taus.push(t ?? cap);
    if (t !== null) reached++;
  }
  taus.sort((a, b) => a - b);
  const mean = taus.reduce((a, b) => a + b, 0) / reps;
  const sd = Math.sqrt(taus.reduce((a, b) => a + (b - mean) ** 2, 0) / (reps - 1));
  const q = (x: number): number => taus[Math.min(reps - 1, Math.max(0, Math.ceil(x * reps) - 1))];
  return { mean, se: sd / Math.sqrt(reps), median: q(0.5), q80: q(0.8), reached: reached / reps };
}
