/**
 * Anytime-valid evidence across completed live runs: p-to-e calibrators, betting strategies that
 * learn the alternative from the runs seen so far, and test martingales per vignette and for the
 * whole event.
 *
 * Why not Fisher after every run. Fisher's method (./combine.ts) is exact for a number of runs fixed
 * before the event. Re-reading it after each added run and stopping at the first p ≤ α is a
 * different procedure whose false-alarm rate grows with the number of looks (measured in
 * test/engine/evidence.test.ts: far above α over 50 runs). Here the evidence is a test martingale
 * instead: it may be read after every run, the event may stop or go on for any reason, and the
 * chance that it EVER reaches 1/α under the null is at most α.
 *
 * 1. Calibrators (Vovk & Wang, "E-values: calibration, combination and applications", Ann. Statist.
 *    49(3):1736–1754, 2021, doi:10.1214/20-AOS2020, §2). A calibrator is a non-increasing
 *    e: [0, 1] → [0, ∞] with ∫₀¹ e(p) dp ≤ 1; for p super-uniform (P(p ≤ t) ≤ t for all t) it gives
 *    E e(p) ≤ 1, i.e. an e-value. Those used here, each with its cumulative G(x) = ∫₀^x e(u) du:
 *      power κ ∈ (0, 1]:   e(p) = κ p^{κ−1},                      G(x) = x^κ
 *      Vovk–Wang mixture:  e(p) = ∫₀¹ κ p^{κ−1} dκ = (1 − p + p ln p)/(p (ln p)²),
 *                                                                G(x) = (x − 1)/ln x
 *      Shafer (Shafer, "Testing by betting", J. R. Stat. Soc. A 184(2):407–431, 2021,
 *      doi:10.1111/rssa.12647, §6):  e(p) = p^{−1/2} − 1,         G(x) = 2√x − x
 *      normal shift δ ≥ 0: e(p) = exp(δ z − δ²/2), z = Φ⁻¹(1 − p), G(x) = Φ(Φ⁻¹(x) + δ)
 *    The last is the likelihood ratio of a one-sided z-test's p-value when the statistic is shifted
 *    by δ (Hung, O'Neill, Bauer & Köhne, "The behavior of the p-value when the alternative hypothesis
 *    is true", Biometrics 53(1):11–22, 1997, doi:10.2307/2533093). Its bets are bounded near p = 0,
 *    which suits the engine's overall p-values: under a discrepancy they pile up between 0.01 and
 *    0.3 rather than at the smallest value (the min-p rank of ./calibrate.ts rarely reaches 1/(N+1)).
 *
 * 2. The lattice. A per-run p-value of the engine lies on {1/L, 2/L, …, 1} with L = N + 1. Any p is
 *    first rounded UP to a working lattice of size L: k = ⌈pL⌉, p' = k/L ≥ p (values within 1e−9
 *    of a lattice point count as on it: floating-point k/L). Rounding up keeps super-uniformity:
 *    P(p' ≤ j/L) = P(p ≤ j/L) ≤ j/L. On the lattice this module uses the lattice-exact form of a
 *    calibrator: the mean of e over the cell,
 *        f(k) = L · (G(k/L) − G((k−1)/L)),   k = 1 … L.
 *    Lemma. If f ≥ 0 is non-increasing in k and (1/L) Σ_k f(k) ≤ 1, then E f(k) ≤ 1 for every
 *    super-uniform lattice p. Proof (Abel summation): with F(j) = P(k ≤ j) ≤ j/L,
 *        E f(k) = f(L) + Σ_{j<L} (f(j) − f(j+1)) F(j) ≤ f(L) + Σ_{j<L} (f(j) − f(j+1)) j/L = (1/L) Σ_k f(k) ≤ 1,
 *    since every difference f(j) − f(j+1) is ≥ 0 (the middle equality is the same summation for the
 *    uniform lattice law). ∎ The lattice-exact f is non-increasing (G is concave) and averages to
 *    G(1) − G(0) = 1, so it is valid; and f(k) ≥ e(k/L) (the mean of a non-increasing e over a cell
 *    is at least its value at the right end), so on the lattice it dominates the continuous
 *    calibrator everywhere, for free. The gain is largest at the smallest value p = 1/L: for the
 *    power calibrator f(1) = L^{1−κ} = e(1/L)/κ; for Vovk–Wang at L = 201, 37.7 instead of 6.9.
 *    With a known lattice no e-value can exceed L (f(1) ≤ L Σ/L).
 *
 * 3. Betting (test martingales). Before run i a strategy chooses a lattice calibrator f_i from runs
 *    1 … i−1 only (predictable), and the evidence after n runs is M_n = Π_{i≤n} f_i(k_i). If every
 *    run's p-value is super-uniform given the earlier runs, E[f_i(k_i) | runs < i] ≤ 1 by the lemma,
 *    so M is a non-negative supermartingale with M_0 = 1 (a test supermartingale), and by Ville's
 *    inequality (Ville, "Étude critique de la notion de collectif", Gauthier-Villars 1939; Ramdas,
 *    Grünwald, Vovk & Shafer, "Game-theoretic statistics and safe anytime-valid inference",
 *    Statist. Sci. 38(4):576–601, 2023, doi:10.1214/23-STS894, §3)
 *        P(M_n ≥ 1/α for some n) ≤ α.
 *    So the first n with M_n ≥ 1/α may be reported as "established" at whatever time it happens,
 *    and it stays established: later runs cannot undo a crossing that was valid when it happened.
 *    Strategies:
 *    - fixed: the same calibrator for every run.
 *    - power-mixture: M_n = Σ_j π_j Π_i f_{κ_j}(k_i) over a grid of κ (prior π uniform); a mixture
 *      of test martingales is one, and it equals betting with the posterior-weighted calibrator
 *      Σ_j π_j^{(i−1)} f_{κ_j}, π^{(i−1)} ∝ π Π_{i'<i} f_{κ_j}(k_{i'}) (Vovk & Wang 2021, §4;
 *      Shafer 2021, §4). Best when the alternative puts mass at the smallest p.
 *    - adaptive (default): the plug-in of a density fitted to the earlier runs (Robbins & Siegmund,
 *      "The expected sample size of some tests of power one", Ann. Statist. 2(3):415–436, 1974,
 *      doi:10.1214/aos/1176342704). Before run i with n = i − 1 earlier runs,
 *          f_i = (1 − η) · [ (1 − λ_n) s + λ_n ĝ_n ] + η,    λ_n = n/(n + c),
 *      where s is a start calibrator (lattice-exact normal shift δ = 1), ĝ_n is the Grenander
 *      estimator of a non-increasing density on the lattice fitted to the n earlier runs (the slopes
 *      of the least concave majorant of their empirical CDF; Grenander, "On the theory of mortality
 *      measurement II", Skand. Aktuarietidskr. 39:125–153, 1956, doi:10.1080/03461238.1956.10414944),
 *      c the shrinkage (prior weight in runs; default 10) and η a floor (default 0.02) that keeps one
 *      run near p = 1 from wiping out the evidence. ĝ_n is non-increasing and averages to 1 on the lattice (its
 *      integral is the empirical CDF at 1), and so do s and the constant 1; a convex combination
 *      keeps both properties, and f_i depends on runs < i only, so the lemma applies and M is a
 *      test supermartingale whatever the data. The strategy learns the shape of the alternative
 *      (the engine's p-values under a discrepancy are not Beta-shaped: they pile up between 0.01
 *      and 0.3) and needs no grid. Measured on the engine's own p-values
 *      (test/engine/evidence.test.ts): the expected number of runs until 1/α is about 0.9 × the
 *      runs a fixed-sample Fisher design needs for 80 % power at single-run power ≈ 20 %, 0.7 × at
 *      16 %, and about 1.1 × when single runs already have 50 % power; Vovk–Wang or the power
 *      mixture need 2–4 times as many runs as the adaptive strategy there.
 *
 * 4. Several vignettes. Per vignette, a martingale on its own runs. For the event, the runs of all
 *    vignettes in arrival order: each run's factor is chosen from its own vignette's earlier runs,
 *    which are part of the event's past, so under the global null (every vignette agrees) with each
 *    run's p-value super-uniform given all earlier runs of the event (e.g. independent runs), the
 *    product over vignettes, taken in arrival order, is again a test supermartingale; so is the
 *    average over a set of vignettes fixed in advance (by the plan, not by the data). The product
 *    gathers a discrepancy shared by many vignettes; the average one confined to a few (it is at
 *    least M_v / V for each vignette v). A crossing of a single vignette's martingale controls that
 *    vignette's false alarm at α; for all V vignettes at once use α/V per vignette, or the average.
 *
 * Assumptions and limits. The guarantee needs each new run's p-value to be super-uniform given the
 * earlier runs. The engine's runs of one vignette are ranked against the same N simulated runs, so
 * their p-values are exchangeable rather than independent (Bates, Candès, Lei, Romano & Sesia,
 * "Testing for outliers with conformal p-values", Ann. Statist. 51(1):149–178, 2023,
 * doi:10.1214/22-AOS2244); the guarantee is then approximate, with an error that shrinks as N grows.
 * test/engine/evidence.test.ts measures it (up to 50 runs, N = 200 and N = 50: about 3 % at
 * α = 5 %). A run excluded after seeing its p-value, or a p-value recomputed until it looks good,
 * breaks the guarantee; a run stopped for any reason before its p-value exists does not. Betting
 * costs evidence while runs agree (after 20 agreeing runs the martingale is usually far below 1),
 * so a discrepancy that only starts later in the event, e.g. after a change of conditions, is
 * better followed by a new stream from that point, decided before its runs are seen.
 */
import { combinePValues } from './combine.js';
import { normalCdf, normalQuantile } from './normal.js';

/** A p-to-e calibrator (see the module comment for the formulas and sources). */
export type CalibratorSpec =
  | { readonly kind: 'vovk-wang' }
  | { readonly kind: 'shafer' }
  | { readonly kind: 'power'; readonly kappa: number }
  | { readonly kind: 'normal-shift'; readonly delta: number };

/** How the calibrator of the next run is chosen. */
export type EvidenceStrategy =
  | { readonly kind: 'fixed'; readonly calibrator: CalibratorSpec }
  | { readonly kind: 'power-mixture'; readonly kappas?: readonly number[] }
  | {
      readonly kind: 'adaptive';
      /** Calibrator of the first run, and the prior shape the fitted density is shrunk towards. */
      readonly start?: CalibratorSpec;
      /** c: the start calibrator's weight in runs (λ_n = n / (n + c)). */
      readonly shrinkage?: number;
      /** η: the share of each bet kept as cash (the factor is never below η). */
      readonly floor?: number;
    };

export const DEFAULT_STRATEGY: EvidenceStrategy = { kind: 'adaptive', start: { kind: 'normal-shift', delta: 1 }, shrinkage: 10, floor: 0.02 };

/** Working lattice when the caller does not give N + 1 (p-values are rounded up to it). */
export const DEFAULT_RESOLUTION = 1000;
/** Largest working lattice accepted (bounds every table and loop). */
export const MAX_RESOLUTION = 1_000_000;
/** κ grid of the power mixture when none is given: 20 values log-spaced on [0.03, 1]. */
export const DEFAULT_KAPPAS: readonly number[] = Array.from({ length: 20 }, (_, i) => Math.exp((Math.log(0.03) * (19 - i)) / 19));

const LATTICE_TOLERANCE = 1e-9;
const INV_SQRT_2PI = 1 / Math.sqrt(2 * Math.PI);

/**
 * Φ⁻¹(p) that stays finite for tiny p. ./normal.ts normalQuantile starts from erfinv(2p − 1), which
 * is −∞ once 2p − 1 rounds to −1 (p below about 1.1e−16). Below 1e−15 this uses Newton's method on
 * ln Φ(x) − ln p, x ← x − (ln Φ(x) − ln p) Φ(x)/φ(x), from the asymptotic start
 * x₀ = −(−2 ln p − ln(−2 ln p) − ln 2π)^{1/2} (Abramowitz & Stegun 26.2.23 ff.), at most 20 steps;
 * Φ(x) there comes from ./normal.ts normalCdf (erfc based, accurate in the far tail down to about
 * 1e−300). Below 1e−300 the start alone is used (relative error in x below 1e−3, never reached on a
 * lattice of at most MAX_RESOLUTION cells).
 */
function lowerTailQuantile(p: number): number {
  if (p >= 1e-15) return normalQuantile(p);
  if (!(p > 0)) return Number.NEGATIVE_INFINITY;
  const lp = Math.log(p);
  let x = -Math.sqrt(-2 * lp - Math.log(-2 * lp) - Math.log(2 * Math.PI));
  if (p < 1e-300) return x;
  for (let i = 0; i < 20; i++) {
    const c = normalCdf(x);
    const step = ((Math.log(c) - lp) * c) / (INV_SQRT_2PI * Math.exp(-0.5 * x * x));
    x -= step;
    if (!(Math.abs(step) > 1e-15 * Math.abs(x))) break;
  }
  return x;
}

function checkP(p: number, where: string): void {
  if (!(p > 0 && p <= 1)) throw new RangeError(`${where}: p-value ${p} is outside (0, 1]`);
}

function checkSpec(spec: CalibratorSpec): void {
  if (spec.kind === 'power' && !(spec.kappa > 0 && spec.kappa <= 1)) throw new RangeError(`power calibrator: κ must be in (0, 1], got ${spec.kappa}`);
  if (spec.kind === 'normal-shift' && !(spec.delta >= 0 && Number.isFinite(spec.delta))) {
    throw new RangeError(`normal-shift calibrator: δ must be finite and ≥ 0, got ${spec.delta}`);
  }
}

/** Vovk–Wang mixture calibrator (1 − p + p ln p)/(p (ln p)²); e(1) = 1/2 (limit), e(0) = ∞. */
export function vovkWangCalibrator(p: number): number {
  if (!(p >= 0 && p <= 1)) return Number.NaN;
  if (p === 0) return Number.POSITIVE_INFINITY;
  const l = Math.log(p);
  // Near p = 1 the formula is 0/0: series 1/2 − l/6 + l²/24 + O(l³) (expand e^l in numerator and denominator).
  if (Math.abs(l) < 1e-3) return 0.5 - l / 6 + (l * l) / 24;
  return (1 - p + p * l) / (p * l * l);
}

/** Shafer's calibrator p^{−1/2} − 1. */
export function shaferCalibrator(p: number): number {
  if (!(p >= 0 && p <= 1)) return Number.NaN;
  return 1 / Math.sqrt(p) - 1;
}

/** Power calibrator κ p^{κ−1}, κ ∈ (0, 1]. */
export function powerCalibrator(p: number, kappa: number): number {
  checkSpec({ kind: 'power', kappa });
  if (!(p >= 0 && p <= 1)) return Number.NaN;
  return kappa * Math.pow(p, kappa - 1);
}

/** Normal-shift calibrator exp(δ Φ⁻¹(1 − p) − δ²/2), δ ≥ 0. */
export function normalShiftCalibrator(p: number, delta: number): number {
  checkSpec({ kind: 'normal-shift', delta });
  if (!(p >= 0 && p <= 1)) return Number.NaN;
  if (delta === 0) return 1;
  return Math.exp(-delta * lowerTailQuantile(p) - (delta * delta) / 2);
}

/** e(p) of a calibrator on the continuum (no lattice). */
export function calibratorValue(spec: CalibratorSpec, p: number): number {
  switch (spec.kind) {
    case 'vovk-wang':
      return vovkWangCalibrator(p);
    case 'shafer':
      return shaferCalibrator(p);
    case 'power':
      return powerCalibrator(p, spec.kappa);
    case 'normal-shift':
      return normalShiftCalibrator(p, spec.delta);
  }
}

/** G(x) = ∫₀^x e(u) du, the calibrator's cumulative (concave, G(0) = 0, G(1) = 1). */
export function calibratorCumulative(spec: CalibratorSpec, x: number): number {
  checkSpec(spec);
  if (!(x >= 0 && x <= 1)) return Number.NaN;
  if (x === 0) return 0;
  if (x === 1) return 1;
  switch (spec.kind) {
    case 'vovk-wang': {
      const l = Math.log(x);
      return l === 0 ? 1 : Math.expm1(l) / l;
    }
    case 'shafer':
      return 2 * Math.sqrt(x) - x;
    case 'power':
      return Math.pow(x, spec.kappa);
    case 'normal-shift':
      return normalCdf(lowerTailQuantile(x) + spec.delta);
  }
}

function checkResolution(resolution: number): void {
  if (!Number.isInteger(resolution) || resolution < 1 || resolution > MAX_RESOLUTION) {
    throw new RangeError(`resolution must be an integer in [1, ${MAX_RESOLUTION}] (N + 1 for N simulated runs), got ${resolution}`);
  }
}

/** The lattice cell k ∈ {1, …, L} of a p-value: k = ⌈pL⌉ (p rounded up; see the module comment). */
export function latticeIndex(p: number, resolution: number): number {
  checkP(p, 'latticeIndex');
  const k = Math.ceil(p * resolution - LATTICE_TOLERANCE);
  return Math.min(resolution, Math.max(1, k));
}

function computeLatticeCalibrator(spec: CalibratorSpec, resolution: number): Float64Array {
  const L = resolution;
  const f = new Float64Array(L + 1);
  let prev = 0;
  for (let k = 1; k <= L; k++) {
    const g = calibratorCumulative(spec, k / L);
    f[k] = Math.max(0, L * (g - prev));
    prev = g;
  }
  return f;
}

/**
 * Tables shared by the bettors (read-only once built): building one costs L quantile evaluations
 * for the normal shift, and the simulations of ./advisor.ts and the event martingale create many
 * bettors on the same lattice. Bounded: cleared when it holds TABLE_CACHE_LIMIT tables.
 */
const TABLE_CACHE_LIMIT = 64;
const tableCache = new Map<string, Float64Array>();

function sharedLatticeCalibrator(spec: CalibratorSpec, resolution: number): Float64Array {
  const key = `${JSON.stringify(spec)}|${resolution}`;
  const hit = tableCache.get(key);
  if (hit) return hit;
  const table = computeLatticeCalibrator(spec, resolution);
  if (tableCache.size >= TABLE_CACHE_LIMIT) tableCache.clear();
  tableCache.set(key, table);
  return table;
}

/** Number of lattice tables currently cached (for the test that the cache stays bounded). */
export function cachedTableCount(): number {
  return tableCache.size;
}

/**
 * The lattice-exact calibrator f(k) = L (G(k/L) − G((k−1)/L)) for k = 1 … L (index 0 unused).
 * Non-increasing, mean exactly 1 over the cells up to rounding (see the lemma in the module comment).
 * Returns a fresh array the caller may change.
 */
export function latticeCalibrator(spec: CalibratorSpec, resolution: number): Float64Array {
  checkSpec(spec);
  checkResolution(resolution);
  return Float64Array.from(sharedLatticeCalibrator(spec, resolution));
}

/** A betting strategy's state: the calibrator for the next run, updated run by run. */
export interface Bettor {
  readonly resolution: number;
  /** The e-value the next run would earn in lattice cell k (1 … L). */
  value(k: number): number;
  /** The whole next calibrator (index 0 unused). */
  table(): Float64Array;
  /** Record a completed run's lattice cell. */
  observe(k: number): void;
  /** An independent copy of the state (for simulating continuations). */
  clone(): Bettor;
}

function fixedBettor(table: Float64Array, resolution: number): Bettor {
  const b: Bettor = {
    resolution,
    value: (k) => table[k],
    table: () => table,
    observe: () => undefined,
    clone: () => b,
  };
  return b;
}

function mixtureBettor(tables: readonly Float64Array[], resolution: number, weights: Float64Array): Bettor {
  const w = Float64Array.from(weights);
  const value = (k: number): number => {
    let s = 0;
    let tw = 0;
    for (let j = 0; j < tables.length; j++) {
      s += w[j] * tables[j][k];
      tw += w[j];
    }
    return s / tw;
  };
  return {
    resolution,
    value,
    table: () => tabulate(value, resolution),
    observe: (k) => {
      let max = 0;
      for (let j = 0; j < tables.length; j++) {
        w[j] *= tables[j][k];
        if (w[j] > max) max = w[j];
      }
      // Renormalise (the posterior only matters up to a constant); keeps the weights in range.
      if (max > 0) for (let j = 0; j < tables.length; j++) w[j] /= max;
    },
    clone: () => mixtureBettor(tables, resolution, w),
  };
}

/** Vertices of the least concave majorant of an empirical CDF on the lattice (cells, CDF values). */
interface Hull {
  readonly cells: number[];
  readonly cdf: number[];
}

/**
 * Upper hull of (0, 0) and the tops of the CDF's jumps (the majorant's vertices are among them), by
 * one pass of Andrew's monotone chain over the occupied cells in increasing order: O(#occupied).
 */
function majorant(cells: readonly number[], counts: readonly number[], n: number): Hull {
  const hx: number[] = [0];
  const hy: number[] = [0];
  let F = 0;
  for (let i = 0; i < cells.length; i++) {
    const j = cells[i];
    F += counts[i] / n;
    // Pop the last vertex while it lies on or below the chord from the one before it to (j, F).
    while (hx.length >= 2) {
      const a = hx.length - 2;
      const b = hx.length - 1;
      if ((hy[b] - hy[a]) * (j - hx[a]) <= (F - hy[a]) * (hx[b] - hx[a])) {
        hx.pop();
        hy.pop();
      } else break;
    }
    hx.push(j);
    hy.push(F);
  }
  return { cells: hx, cdf: hy };
}

/** Slope of the majorant on lattice cell k (density relative to uniform); 0 beyond the last vertex. */
function slopeAt(hull: Hull, k: number, L: number): number {
  const hx = hull.cells;
  if (k > hx[hx.length - 1]) return 0;
  let lo = 1;
  let hi = hx.length - 1;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (hx[mid] >= k) hi = mid;
    else lo = mid + 1;
  }
  return ((hull.cdf[lo] - hull.cdf[lo - 1]) * L) / (hx[lo] - hx[lo - 1]);
}

/**
 * Grenander estimator on the lattice: slopes (density relative to uniform) of the least concave
 * majorant of the empirical CDF of `n` observations with cell counts `counts` (index 1 … L; index
 * 0 unused). Non-increasing, mean over the cells 1 (the majorant ends at the CDF's value 1);
 * 0 above the largest observation. With no observations, the uniform density 1.
 */
/** The bet on every lattice cell 1 … L (index 0 unused). */
function tabulate(value: (k: number) => number, resolution: number): Float64Array {
  const out = new Float64Array(resolution + 1);
  for (let k = 1; k <= resolution; k++) out[k] = value(k);
  return out;
}

export function grenanderOnLattice(counts: Float64Array, n: number, out: Float64Array = new Float64Array(counts.length)): Float64Array {
  const L = counts.length - 1;
  out.fill(0);
  if (n <= 0) {
    for (let k = 1; k <= L; k++) out[k] = 1;
    return out;
  }
  const cells: number[] = [];
  const cnt: number[] = [];
  for (let k = 1; k <= L; k++) if (counts[k] > 0) {
    cells.push(k);
    cnt.push(counts[k]);
  }
  const hull = majorant(cells, cnt, n);
  for (let h = 1; h < hull.cells.length; h++) {
    const slope = ((hull.cdf[h] - hull.cdf[h - 1]) * L) / (hull.cells[h] - hull.cells[h - 1]);
    for (let k = hull.cells[h - 1] + 1; k <= hull.cells[h]; k++) out[k] = slope;
  }
  return out;
}

/**
 * The adaptive bettor. State: the occupied lattice cells of the runs so far (sorted) and their
 * counts, so that a bet costs O(#distinct cells) and a copy O(#runs), not O(L).
 */
function adaptiveBettor(start: Float64Array, resolution: number, shrinkage: number, floor: number, cells: number[], counts: number[], n: number): Bettor {
  let seen = n;
  let hull: Hull | null = null;
  const value = (k: number): number => {
    let bet = start[k];
    if (seen > 0) {
      hull ??= majorant(cells, counts, seen);
      const lambda = seen / (seen + shrinkage);
      bet = (1 - lambda) * start[k] + lambda * slopeAt(hull, k, resolution);
    }
    return (1 - floor) * bet + floor;
  };
  return {
    resolution,
    value,
    table: () => tabulate(value, resolution),
    observe: (k) => {
      let lo = 0;
      let hi = cells.length;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (cells[mid] < k) lo = mid + 1;
        else hi = mid;
      }
      if (cells[lo] === k) counts[lo] += 1;
      else {
        cells.splice(lo, 0, k);
        counts.splice(lo, 0, 1);
      }
      seen += 1;
      hull = null;
    },
    clone: () => adaptiveBettor(start, resolution, shrinkage, floor, [...cells], [...counts], seen),
  };
}

/** A fresh bettor for a strategy on a lattice of `resolution` cells. */
export function createBettor(strategy: EvidenceStrategy, resolution: number): Bettor {
  checkResolution(resolution);
  switch (strategy.kind) {
    case 'fixed':
      checkSpec(strategy.calibrator);
      return fixedBettor(sharedLatticeCalibrator(strategy.calibrator, resolution), resolution);
    case 'power-mixture': {
      const kappas = strategy.kappas ?? DEFAULT_KAPPAS;
      if (kappas.length === 0) throw new RangeError('power-mixture: empty κ grid');
      const tables = kappas.map((kappa) => {
        checkSpec({ kind: 'power', kappa });
        return sharedLatticeCalibrator({ kind: 'power', kappa }, resolution);
      });
      return mixtureBettor(tables, resolution, new Float64Array(kappas.length).fill(1));
    }
    case 'adaptive': {
      const shrinkage = strategy.shrinkage ?? 10;
      const floor = strategy.floor ?? 0.02;
      if (!(shrinkage > 0 && Number.isFinite(shrinkage))) throw new RangeError(`adaptive: shrinkage must be finite and > 0, got ${shrinkage}`);
      if (!(floor >= 0 && floor < 1)) throw new RangeError(`adaptive: floor must be in [0, 1), got ${floor}`);
      const startSpec = strategy.start ?? { kind: 'normal-shift', delta: 1 };
      checkSpec(startSpec);
      const start = sharedLatticeCalibrator(startSpec, resolution);
      return adaptiveBettor(start, resolution, shrinkage, floor, [], [], 0);
    }
  }
}

/** Fisher's combination of the same runs: valid only when the number of runs was fixed in advance. */
export interface FixedSampleFisher {
  readonly pValue: number;
  readonly statistic: number;
  readonly runs: number;
  readonly validity: 'fixed-run-count-only';
  readonly note: string;
}

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

function checkAlpha(alpha: number): void {
  if (!(alpha > 0 && alpha < 1)) throw new RangeError(`alpha must be in (0, 1), got ${alpha}`);
}

const FISHER_NOTE = 'Fisher p-value of these runs: valid only if this number of runs was fixed before the event; re-reading it after every run inflates false alarms.';

export function fisherFixed(pvalues: ArrayLike<number>): FixedSampleFisher | null {
  if (pvalues.length === 0) return null;
  const c = combinePValues(pvalues, 'fisher');
  return { pValue: c.pValue, statistic: c.statistic, runs: c.count, validity: 'fixed-run-count-only', note: FISHER_NOTE };
}

function needs(bettor: Bettor, current: number, threshold: number): number | null {
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

/** One completed run of an event: its vignette (stream) and overall p-value. */
export interface StreamRun {
  readonly stream: string;
  readonly p: number;
}

export type EventCombination = 'product' | 'average';

export interface EventEvidenceOptions {
  /** L per stream (N + 1 of the vignette); streams not listed use `resolution`. */
  readonly resolutions?: Readonly<Record<string, number>>;
  readonly resolution?: number;
  /** 'product' (default): a discrepancy shared by many vignettes; 'average': one confined to a few. */
  readonly combine?: EventCombination;
  /**
   * The vignettes of the plan, fixed before the event (required in spirit for 'average': its weights
   * 1/V must not depend on the data). Default: the streams that appear in the runs, in order.
   */
  readonly streams?: readonly string[];
}

export interface EventEvidence {
  readonly alpha: number;
  readonly threshold: number;
  readonly combine: EventCombination;
  /** Per vignette, the evidence of its own runs. */
  readonly streams: ReadonlyArray<{ readonly stream: string; readonly evidence: SequentialEvidence }>;
  /** The event martingale after each run, in arrival order (same length as the runs). */
  readonly martingale: Float64Array;
  readonly current: number;
  /** Arrival index (1-based) of the run at which the event martingale first reached 1/α. */
  readonly crossedAt: number | null;
  readonly established: boolean;
  /** Fisher's fixed-sample p-value of all runs (fixed run count only). */
  readonly fisherFixed: FixedSampleFisher | null;
}

/**
 * Evidence per vignette and for the whole event from runs in arrival order (module comment §4).
 */
export function eventEvidence(
  runs: readonly StreamRun[],
  alpha: number,
  strategy: EvidenceStrategy = DEFAULT_STRATEGY,
  options: EventEvidenceOptions = {},
): EventEvidence {
  checkAlpha(alpha);
  const combine = options.combine ?? 'product';
  const names: string[] = [...(options.streams ?? [])];
  for (const r of runs) {
    if (names.includes(r.stream)) continue;
    if (options.streams && combine === 'average') throw new RangeError(`eventEvidence: run of vignette ${r.stream}, which is not in the declared streams`);
    names.push(r.stream);
  }
  const threshold = 1 / alpha;
  interface StreamState {
    readonly resolution: number;
    readonly bettor: Bettor;
    readonly ps: number[];
    readonly es: number[];
    readonly ms: number[];
    m: number;
    crossedAt: number | null;
  }
  const state = new Map<string, StreamState>(
    names.map((s) => {
      const resolution = options.resolutions?.[s] ?? options.resolution ?? DEFAULT_RESOLUTION;
      return [s, { resolution, bettor: createBettor(strategy, resolution), ps: [], es: [], ms: [], m: 1, crossedAt: null }];
    }),
  );
  const martingale = new Float64Array(runs.length);
  let product = 1;
  let sum = names.length; // Σ_v M_v, every vignette starting at 1
  let crossedAt: number | null = null;
  runs.forEach((r, i) => {
    checkP(r.p, `eventEvidence: run ${i + 1} (${r.stream})`);
    const v = state.get(r.stream);
    if (!v) throw new RangeError(`eventEvidence: unknown vignette ${r.stream}`);
    const k = latticeIndex(r.p, v.resolution);
    const e = v.bettor.value(k);
    v.bettor.observe(k);
    sum += v.m * e - v.m;
    v.m *= e;
    v.ps.push(r.p);
    v.es.push(e);
    v.ms.push(v.m);
    if (v.crossedAt === null && v.m >= threshold) v.crossedAt = v.ps.length;
    product *= e;
    const m = combine === 'product' ? product : sum / names.length;
    martingale[i] = m;
    if (crossedAt === null && m >= threshold) crossedAt = i + 1;
  });
  const streams = names.map((s) => {
    const v = state.get(s);
    if (!v) throw new RangeError(`eventEvidence: unknown vignette ${s}`);
    const evidence: SequentialEvidence = {
      alpha,
      threshold,
      resolution: v.resolution,
      eValues: Float64Array.from(v.es),
      martingale: Float64Array.from(v.ms),
      current: v.m,
      crossedAt: v.crossedAt,
      established: v.crossedAt !== null,
      nextRunNeeds: v.crossedAt !== null ? null : needs(v.bettor, v.m, threshold),
      fisherFixed: fisherFixed(v.ps),
    };
    return { stream: s, evidence };
  });
  return {
    alpha,
    threshold,
    combine,
    streams,
    martingale,
    current: runs.length > 0 ? martingale[runs.length - 1] : 1,
    crossedAt,
    established: crossedAt !== null,
    fisherFixed: fisherFixed(runs.map((r) => r.p)),
  };
}
