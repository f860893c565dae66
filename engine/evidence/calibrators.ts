/**
 * Calibrators: turning one p-value into an e-value, on the continuum and on a lattice.
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
 *    which suits the engine's p-values: under a discrepancy they pile up between 0.01 and 0.3 rather
 *    than at the smallest value.
 *
 * 2. The lattice. A rank p-value lies on {1/L, 2/L, …, 1} with L = N + 1; a smoothed (randomised)
 *    conformal p-value is continuous and exactly Uniform(0, 1) under the null. Either is first
 *    rounded UP to a working lattice of size L: k = ⌈pL⌉, p' = k/L ≥ p (values within 1e−9 of a
 *    lattice point count as on it: floating-point k/L). Rounding up keeps super-uniformity:
 *    P(p' ≤ j/L) = P(p ≤ j/L) ≤ j/L; a uniform p becomes exactly uniform on the lattice, so the
 *    lattice costs a continuous p-value only its resolution below 1/L. On the lattice the
 *    lattice-exact form of a calibrator is used, the mean of e over the cell,
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
 *    No lattice e-value can exceed L (f(1) ≤ L Σ/L).
 */
import { normalCdf, normalQuantile } from '../normal.js';

/** A p-to-e calibrator (formulas and sources in the module comment). */
export type CalibratorSpec =
  | { readonly kind: 'vovk-wang' }
  | { readonly kind: 'shafer' }
  | { readonly kind: 'power'; readonly kappa: number }
  | { readonly kind: 'normal-shift'; readonly delta: number };


/** Working lattice when the caller does not give N + 1 (p-values are rounded up to it). */
export const DEFAULT_RESOLUTION = 1000;
/** Largest working lattice accepted (bounds every table and loop). */
export const MAX_RESOLUTION = 1_000_000;

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

export function checkP(p: number, where: string): void {
  if (!(p > 0 && p <= 1)) throw new RangeError(`${where}: p-value ${p} is outside (0, 1]`);
}

export function checkSpec(spec: CalibratorSpec): void {
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

export function checkResolution(resolution: number): void {
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
 * for the normal shift, and the simulations of ../advisor.ts and the event martingale create many
 * bettors on the same lattice. Bounded: cleared when it holds TABLE_CACHE_LIMIT tables.
 */
const TABLE_CACHE_LIMIT = 64;
const tableCache = new Map<string, Float64Array>();

export function sharedLatticeCalibrator(spec: CalibratorSpec, resolution: number): Float64Array {
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

