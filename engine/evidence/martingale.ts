/**
 * Test martingales: the evidence of one stream of runs, and Ville's inequality.
 *
 * With a predictable strategy (./bettors.ts) the evidence after n runs is M_n = Π_{i≤n} f_i(k_i).
 * If every run's p-value is super-uniform given the earlier runs, E[f_i(k_i) | runs < i] ≤ 1 (the
 * lemma of ./calibrators.ts), so M is a non-negative supermartingale with M_0 = 1 (a test
 * supermartingale), and by Ville's inequality (Ville, "Étude critique de la notion de collectif",
 * Gauthier-Villars 1939; Ramdas, Grünwald, Vovk & Shafer, "Game-theoretic statistics and safe
 * anytime-valid inference", Statist. Sci. 38(4):576–601, 2023, doi:10.1214/23-STS894, §3)
 *     P(M_n ≥ 1/α for some n) ≤ α.
 * So the first n with M_n ≥ 1/α may be reported as "established" whenever it happens, and it stays
 * established: later runs cannot undo a crossing that was valid when it happened. Why not Fisher
 * after every run: see ./fisher-fixed.ts.
 *
 * Assumptions and limits. The guarantee needs each new run's p-value to be super-uniform given the
 * earlier runs. Runs of one vignette ranked against the same N simulated runs have exchangeable
 * rather than independent p-values (Bates, Candès, Lei, Romano & Sesia, "Testing for outliers with
 * conformal p-values", Ann. Statist. 51(1):149–178, 2023, doi:10.1214/22-AOS2244); the guarantee is
 * then approximate, with an error that shrinks as N grows (test/engine/evidence.test.ts measures
 * it). A run excluded after seeing its p-value, or a p-value recomputed until it looks good, breaks
 * the guarantee; a run stopped for any reason before its p-value exists does not. Betting costs
 * evidence while runs agree, so a discrepancy that only starts later in the event is better followed
 * by a new stream from that point, decided before its runs are seen.
 */
import { createBettor, DEFAULT_STRATEGY, type Bettor, type EvidenceStrategy } from './bettors.js';
import { checkP, DEFAULT_RESOLUTION, latticeIndex } from './calibrators.js';
import { fisherFixed, type FixedSampleFisher } from './fisher-fixed.js';

/** The record of one stream of runs (one statistic of one vignette, or a single p per run). */
export interface SequentialEvidence {
  readonly alpha: number;
  /** 1/α: the level of evidence that establishes a discrepancy (Ville's inequality). */
  readonly threshold: number;
  readonly resolution: number;
  /** Per run: the e-value it earned (the factor of the martingale). */
  readonly eValues: Float64Array;
  /** Per run: the evidence after that run (running product, a test martingale under the null). */
  readonly martingale: Float64Array;
  /** The evidence now (1 before any run). */
  readonly current: number;
  /** The run (1-based) at which the evidence first reached the threshold, or null. */
  readonly crossedAt: number | null;
  /** True once the threshold has been reached; stays true whatever later runs show. */
  readonly established: boolean;
  /** The largest p-value the next run could have and still establish the evidence (null if none can). */
  readonly nextRunNeeds: number | null;
  /** Fisher's fixed-sample p-value of the same runs (null without runs). */
  readonly fisherFixed: FixedSampleFisher | null;
}

export interface EvidenceOptions {
  /** L = N + 1, the lattice of the per-run p-values (default DEFAULT_RESOLUTION; p is rounded up to it). */
  readonly resolution?: number;
}

/** α must lie in (0, 1): the threshold is 1/α. */
export function checkAlpha(alpha: number): void {
  if (!(alpha > 0 && alpha < 1)) throw new RangeError(`alpha must be in (0, 1), got ${alpha}`);
}

/** The largest lattice p-value whose bet lifts `current` to `threshold` on the next run (null if none can). */
export function needs(bettor: Bettor, current: number, threshold: number): number | null {
  // The next calibrator is non-increasing in k, so the cells that would cross form a prefix 1 … k*:
  // binary search for k* (O(log L) bets instead of the whole table).
  if (!(current * bettor.value(1) >= threshold)) return null;
  let lo = 1;
  let hi = bettor.resolution;
  while (lo < hi) {
    const mid = (lo + hi + 1) >> 1;
    if (current * bettor.value(mid) >= threshold) lo = mid;
    else hi = mid - 1;
  }
  return lo / bettor.resolution;
}

/**
 * Incremental evidence for one stream of runs: push each completed run's p-value. A push costs
 * O(d) for the adaptive strategy (d distinct lattice cells seen so far: the Grenander hull), O(#κ)
 * for the power mixture and O(1) for a fixed calibrator.
 * `sequentialEvidence` is its batch twin.
 */
export interface EvidenceStream {
  push(p: number): { readonly eValue: number; readonly evidence: number; readonly established: boolean };
  snapshot(): SequentialEvidence;
}

export function createEvidenceStream(alpha: number, strategy: EvidenceStrategy = DEFAULT_STRATEGY, options: EvidenceOptions = {}): EvidenceStream {
  checkAlpha(alpha);
  const resolution = options.resolution ?? DEFAULT_RESOLUTION;
  const bettor = createBettor(strategy, resolution);
  const threshold = 1 / alpha;
  const ps: number[] = [];
  const es: number[] = [];
  const ms: number[] = [];
  let m = 1;
  let crossedAt: number | null = null;
  return {
    push(p: number) {
      checkP(p, 'evidence');
      const k = latticeIndex(p, resolution);
      const e = bettor.value(k);
      bettor.observe(k);
      m *= e;
      ps.push(p);
      es.push(e);
      ms.push(m);
      if (crossedAt === null && m >= threshold) crossedAt = ps.length;
      return { eValue: e, evidence: m, established: crossedAt !== null };
    },
    snapshot(): SequentialEvidence {
      return {
        alpha,
        threshold,
        resolution,
        eValues: Float64Array.from(es),
        martingale: Float64Array.from(ms),
        current: m,
        crossedAt,
        established: crossedAt !== null,
        nextRunNeeds: crossedAt !== null ? null : needs(bettor, m, threshold),
        fisherFixed: fisherFixed(ps),
      };
    },
  };
}

/**
 * Anytime-valid evidence of a discrepancy from the per-run p-values of one vignette, in run order
 * (method in the module comment): per-run e-values, the test martingale, the threshold 1/α, the
 * first crossing, and for comparison Fisher's fixed-sample p-value of the same runs.
 */
export function sequentialEvidence(
  pvalues: ArrayLike<number>,
  alpha: number,
  strategy: EvidenceStrategy = DEFAULT_STRATEGY,
  options: EvidenceOptions = {},
): SequentialEvidence {
  checkAlpha(alpha);
  const resolution = options.resolution ?? DEFAULT_RESOLUTION;
  const bettor = createBettor(strategy, resolution);
  const n = pvalues.length;
  const eValues = new Float64Array(n);
  const martingale = new Float64Array(n);
  const threshold = 1 / alpha;
  let m = 1;
  let crossedAt: number | null = null;
  for (let i = 0; i < n; i++) {
    checkP(pvalues[i], `sequentialEvidence: run ${i + 1}`);
    const k = latticeIndex(pvalues[i], resolution);
    eValues[i] = bettor.value(k);
    bettor.observe(k);
    m *= eValues[i];
    martingale[i] = m;
    if (crossedAt === null && m >= threshold) crossedAt = i + 1;
  }
  return {
    alpha,
    threshold,
    resolution,
    eValues,
    martingale,
    current: m,
    crossedAt,
    established: crossedAt !== null,
    nextRunNeeds: crossedAt !== null ? null : needs(bettor, m, threshold),
    fisherFixed: fisherFixed(pvalues),
  };
}
