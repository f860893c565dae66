/**
 * Functional principal component analysis (FPCA) of curves on a common grid, with L2 quadrature
 * weights.
 *
 * Method (Ramsay & Silverman, "Functional Data Analysis", 2nd ed., Springer 2005, §8.4.2,
 * doi:10.1007/b98888): with trapezoid weights w, the L2 inner product is ⟨f, g⟩ = Σ_d w_d f_d g_d.
 * Let Y = (X − 1mᵀ)·diag(√w). The eigenpairs (λ_k, v_k) of YᵀY/(N−1) give the eigenvalues of the
 * covariance operator and the eigenfunctions φ_k = v_k / √w (so ⟨φ_j, φ_k⟩ = δ_jk); scores are
 * ξ_ik = ⟨x_i − m, φ_k⟩ = (Y v_k)_i.
 *
 * Two solvers give the same model up to rounding:
 * - exact: a dense symmetric eigendecomposition (ml-matrix tred2/tql2) of the smaller of the Gram
 *   matrix YYᵀ (N×N) and the covariance YᵀY (D×D);
 * - randomized: subspace iteration for the leading components only (Halko, Martinsson & Tropp,
 *   "Finding structure with randomness", SIAM Review 53(2):217–288, 2011, doi:10.1137/090771806,
 *   Algorithms 4.4 and 5.1), with a seeded Gaussian test matrix, `POWER_STEPS` power iterations with
 *   re-orthonormalisation, and oversampling `OVERSAMPLE`; the subspace grows (doubling, bounded)
 *   until the kept components reach the variance fraction. The total variance is exact in both
 *   (‖Y‖²_F/(N−1)), so "variance explained" never depends on the solver.
 *
 * Everything is permutation-equivariant in the rows of X, which the conformal calibration relies on.
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { createRng } from './rng.js';
import type { ComponentRule } from './types.js';

export const OVERSAMPLE = 10;
export const POWER_STEPS = 3;
/** Eigenvalues below this fraction of the largest are numerical noise and never kept. */
export const EIGEN_FLOOR = 1e-10;
const MAX_GROWTH_ROUNDS = 8;

export type FpcaSolver = 'exact' | 'randomized' | 'auto';

export interface FpcaModel {
  readonly n: number;
  readonly mean: Float64Array;
  readonly weights: Float64Array;
  /** Retained eigenvalues, descending. */
  readonly eigenvalues: Float64Array;
  /** Retained eigenfunctions φ_k on the grid (0 where the weight is 0). */
  readonly eigenfunctions: readonly Float64Array[];
  /** Scores of the fitted curves: scores[i][k]. */
  readonly scores: readonly Float64Array[];
  readonly totalVariance: number;
  readonly varianceExplained: number;
  readonly solver: 'exact' | 'randomized';
}

export interface FpcaOptions {
  readonly solver?: FpcaSolver;
  readonly seed?: number;
  /** Upper bound on components (defaults to N − 2). */
  readonly maxComponents?: number;
}

interface Spectrum {
  /** eigenvalues of YᵀY/(N−1), descending */
  values: Float64Array;
  /** unit eigenvectors v_k in the compressed (active-column) space */
  vectors: Float64Array[];
  /** scores (Y v_k)_i */
  scores: Float64Array[];
}

/** Centre the curves and scale by √w, keeping only columns with positive weight. */
function centredWeighted(curves: readonly Float64Array[], weights: Float64Array): { mean: Float64Array; rows: Float64Array[]; active: Int32Array } {
  const N = curves.length;
  const D = weights.length;
  const mean = new Float64Array(D);
  for (const x of curves) {
    if (x.length !== D) throw new RangeError(`fitFpca: curve of length ${x.length}, expected ${D}`);
    for (let d = 0; d < D; d++) mean[d] += x[d];
  }
  for (let d = 0; d < D; d++) mean[d] /= N;
  const activeList: number[] = [];
  for (let d = 0; d < D; d++) if (weights[d] > 0) activeList.push(d);
  const active = Int32Array.from(activeList);
  const sw = new Float64Array(active.length);
  for (let j = 0; j < active.length; j++) sw[j] = Math.sqrt(weights[active[j]]);
  const rows = curves.map((x) => {
    const y = new Float64Array(active.length);
    for (let j = 0; j < active.length; j++) y[j] = (x[active[j]] - mean[active[j]]) * sw[j];
    return y;
  });
  return { mean, rows, active };
}

function dot(a: Float64Array, b: Float64Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i] * b[i];
  return s;
}

/** Symmetric eigendecomposition, descending, via ml-matrix. */
function symmetricEigen(m: Matrix): { values: Float64Array; vectors: Float64Array[] } {
  const evd = new EigenvalueDecomposition(m, { assumeSymmetric: true });
  const vals = evd.realEigenvalues;
  const V = evd.eigenvectorMatrix;
  const order = vals.map((_, i) => i).sort((a, b) => vals[b] - vals[a]);
  const values = Float64Array.from(order, (i) => vals[i]);
  const vectors = order.map((i) => Float64Array.from(V.getColumn(i)));
  return { values, vectors };
}

function exactSpectrum(rows: Float64Array[], dim: number): Spectrum {
  const N = rows.length;
  if (N <= dim) {
    const g = new Matrix(N, N);
    for (let i = 0; i < N; i++) {
      for (let j = i; j < N; j++) {
        const v = dot(rows[i], rows[j]);
        g.set(i, j, v);
        g.set(j, i, v);
      }
    }
    const { values: mu, vectors: u } = symmetricEigen(g);
    const values = new Float64Array(mu.length);
    const vectors: Float64Array[] = [];
    const scores: Float64Array[] = [];
    for (let k = 0; k < mu.length; k++) {
      const m = Math.max(mu[k], 0);
      values[k] = m / (N - 1);
      const s = Math.sqrt(m);
      const v = new Float64Array(dim);
      if (s > 0) {
        for (let i = 0; i < N; i++) {
          const c = u[k][i] / s;
          if (c !== 0) for (let d = 0; d < dim; d++) v[d] += rows[i][d] * c;
        }
      }
      vectors.push(v);
      scores.push(Float64Array.from(u[k], (x) => x * s));
    }
    return { values, vectors, scores };
  }
  // YᵀY accumulated row by row in flat upper-triangular storage, then mirrored.
  const acc = new Float64Array(dim * dim);
  for (const y of rows) {
    for (let a = 0; a < dim; a++) {
      const ya = y[a];
      if (ya === 0) continue;
      const base = a * dim;
      for (let b = a; b < dim; b++) acc[base + b] += ya * y[b];
    }
  }
  const c = new Matrix(dim, dim);
  for (let a = 0; a < dim; a++) {
    for (let b = a; b < dim; b++) {
      const v = acc[a * dim + b];
      c.set(a, b, v);
      c.set(b, a, v);
    }
  }
  const { values: mu, vectors } = symmetricEigen(c);
  const values = Float64Array.from(mu, (m) => Math.max(m, 0) / (N - 1));
  const scores = vectors.map((v) => Float64Array.from(rows, (y) => dot(y, v)));
  return { values, vectors, scores };
}

/** Orthonormalise the columns (stored as arrays) in place: modified Gram–Schmidt, applied twice. */
function orthonormalise(cols: Float64Array[]): Float64Array[] {
  const out: Float64Array[] = [];
  for (const c0 of cols) {
    const c = Float64Array.from(c0);
    const norm0 = Math.sqrt(dot(c, c));
    for (let pass = 0; pass < 2; pass++) {
      for (const q of out) {
        const r = dot(q, c);
        for (let i = 0; i < c.length; i++) c[i] -= r * q[i];
      }
    }
    const norm = Math.sqrt(dot(c, c));
    if (norm > 1e-12 * Math.max(norm0, 1e-300)) {
      for (let i = 0; i < c.length; i++) c[i] /= norm;
      out.push(c);
    }
  }
  return out;
}

/**
 * Y·V with Y the N rows and V given as columns of length dim; result: columns of length N.
 * Y is also passed packed row-major (`packed`, N·dim) so the inner loop runs over contiguous memory.
 */
function timesCols(packed: Float64Array, N: number, dim: number, cols: Float64Array[]): Float64Array[] {
  return cols.map((v) => {
    const out = new Float64Array(N);
    for (let i = 0; i < N; i++) {
      const base = i * dim;
      let s0 = 0;
      let s1 = 0;
      let d = 0;
      for (; d + 1 < dim; d += 2) {
        s0 += packed[base + d] * v[d];
        s1 += packed[base + d + 1] * v[d + 1];
      }
      if (d < dim) s0 += packed[base + d] * v[d];
      out[i] = s0 + s1;
    }
    return out;
  });
}

/** Yᵀ·Q for Q given as columns of length N; result: columns of length dim. */
function transposeTimesCols(packed: Float64Array, N: number, dim: number, cols: Float64Array[]): Float64Array[] {
  return cols.map((q) => {
    const out = new Float64Array(dim);
    for (let i = 0; i < N; i++) {
      const qi = q[i];
      if (qi === 0) continue;
      const base = i * dim;
      for (let d = 0; d < dim; d++) out[d] += qi * packed[base + d];
    }
    return out;
  });
}

function randomizedSpectrum(rows: Float64Array[], dim: number, width: number, seed: number): Spectrum {
  const N = rows.length;
  const packed = new Float64Array(N * dim);
  rows.forEach((y, i) => packed.set(y, i * dim));
  const rng = createRng(seed);
  const omega: Float64Array[] = [];
  for (let j = 0; j < width; j++) {
    const c = new Float64Array(dim);
    for (let d = 0; d < dim; d++) c[d] = rng.normal();
    omega.push(c);
  }
  let Q = orthonormalise(timesCols(packed, N, dim, omega));
  for (let p = 0; p < POWER_STEPS; p++) {
    const W = orthonormalise(transposeTimesCols(packed, N, dim, Q));
    Q = orthonormalise(timesCols(packed, N, dim, W));
  }
  // B = Qᵀ Y (l × dim); eigen of B Bᵀ (l × l).
  const B = transposeTimesCols(packed, N, dim, Q);
  const l = B.length;
  const m = new Matrix(l, l);
  for (let a = 0; a < l; a++) {
    for (let b = a; b < l; b++) {
      const v = dot(B[a], B[b]);
      m.set(a, b, v);
      m.set(b, a, v);
    }
  }
  const { values: mu, vectors: u } = symmetricEigen(m);
  const values = new Float64Array(l);
  const vectors: Float64Array[] = [];
  const scores: Float64Array[] = [];
  for (let k = 0; k < l; k++) {
    const mk = Math.max(mu[k], 0);
    values[k] = mk / (N - 1);
    const s = Math.sqrt(mk);
    const v = new Float64Array(dim);
    const sc = new Float64Array(N);
    for (let a = 0; a < l; a++) {
      const c = u[k][a];
      if (c === 0) continue;
      for (let d = 0; d < dim; d++) v[d] += (B[a][d] * c) / (s > 0 ? s : 1);
      for (let i = 0; i < N; i++) sc[i] += Q[a][i] * c * s;
    }
    vectors.push(v);
    scores.push(sc);
  }
  return { values, vectors, scores };
}

/** Number of components under the rule, given descending eigenvalues and the exact total. */
export function componentCount(values: Float64Array, total: number, rule: ComponentRule, cap: number): number {
  const top = values.length > 0 ? values[0] : 0;
  let usable = 0;
  while (usable < values.length && usable < cap && values[usable] > EIGEN_FLOOR * top) usable++;
  if (rule.kind === 'fixed') return Math.min(rule.count, usable);
  let acc = 0;
  for (let k = 0; k < usable; k++) {
    acc += values[k];
    if (acc >= rule.fraction * total) return k + 1;
  }
  return usable;
}

/**
 * Fit the FPCA model. `weights` has one entry per curve element (channels already joined and
 * scaled, see ./calibrate.ts); elements with weight 0 are outside the judged window.
 */
export function fitFpca(curves: readonly Float64Array[], weights: Float64Array, rule: ComponentRule, options: FpcaOptions = {}): FpcaModel {
  const N = curves.length;
  if (N < 3) throw new RangeError(`fitFpca: need at least 3 curves, got ${N}`);
  const { mean, rows, active } = centredWeighted(curves, weights);
  const dim = active.length;
  if (dim === 0) throw new RangeError('fitFpca: no grid point has positive weight');
  let total = 0;
  for (const y of rows) total += dot(y, y);
  total /= N - 1;
  const cap = Math.min(options.maxComponents ?? N - 2, N - 2, dim);
  const rank = Math.min(N - 1, dim);
  const solverChoice = options.solver ?? 'auto';
  const seed = options.seed ?? 0x5eed;

  let spectrum: Spectrum;
  let solver: 'exact' | 'randomized';
  let K: number;
  const wantExact = solverChoice === 'exact' || (solverChoice === 'auto' && Math.min(N, dim) <= 64);
  if (wantExact) {
    spectrum = exactSpectrum(rows, dim);
    solver = 'exact';
    K = componentCount(spectrum.values, total, rule, cap);
  } else {
    solver = 'randomized';
    // Grow the subspace until the components the rule keeps lie within its accurate leading part
    // (the first `target` of `target + OVERSAMPLE` columns), or the subspace is the whole range.
    let target = rule.kind === 'fixed' ? Math.min(rule.count, cap) : 8;
    spectrum = randomizedSpectrum(rows, dim, Math.min(rank, target + OVERSAMPLE), seed);
    K = componentCount(spectrum.values, total, rule, Math.min(cap, spectrum.values.length));
    for (let round = 0; round < MAX_GROWTH_ROUNDS; round++) {
      const width = spectrum.values.length;
      const settled = K < target || (rule.kind === 'fixed' && K >= Math.min(rule.count, cap));
      if (settled || width >= rank) break;
      target *= 2;
      spectrum = randomizedSpectrum(rows, dim, Math.min(rank, target + OVERSAMPLE), seed);
      K = componentCount(spectrum.values, total, rule, Math.min(cap, spectrum.values.length));
    }
  }

  return modelFromSpectrum(spectrum, { mean, active, weights, total, n: N }, K, solver);
}

/**
 * The model of the K leading components of a spectrum: eigenfunctions φ_k = v_k/√w on the grid
 * (0 outside the window), with the sign convention ∫φ ≥ 0 (largest entry positive when the
 * integral vanishes), and the curves' scores.
 */
function modelFromSpectrum(
  spectrum: Spectrum,
  frame: { mean: Float64Array; active: Int32Array; weights: Float64Array; total: number; n: number },
  K: number,
  solver: 'exact' | 'randomized',
): FpcaModel {
  const { mean, active, weights, total, n: N } = frame;
  const dim = active.length;
  const D = weights.length;
  const eigenfunctions: Float64Array[] = [];
  const scoreCols: Float64Array[] = [];
  for (let k = 0; k < K; k++) {
    const v = spectrum.vectors[k];
    const phi = new Float64Array(D);
    let integral = 0;
    let biggest = 0;
    for (let j = 0; j < dim; j++) {
      const d = active[j];
      phi[d] = v[j] / Math.sqrt(weights[d]);
      integral += weights[d] * phi[d];
      if (Math.abs(v[j]) > Math.abs(biggest)) biggest = v[j];
    }
    const flip = Math.abs(integral) > 1e-12 ? integral < 0 : biggest < 0;
    const sc = Float64Array.from(spectrum.scores[k]);
    if (flip) {
      for (let d = 0; d < D; d++) phi[d] = -phi[d];
      for (let i = 0; i < N; i++) sc[i] = -sc[i];
    }
    eigenfunctions.push(phi);
    scoreCols.push(sc);
  }
  const scores = Array.from({ length: N }, (_, i) => Float64Array.from(scoreCols, (c) => c[i]));
  const eigenvalues = spectrum.values.slice(0, K);
  let kept = 0;
  for (let k = 0; k < K; k++) kept += eigenvalues[k];
  return {
    n: N,
    mean,
    weights,
    eigenvalues,
    eigenfunctions,
    scores,
    totalVariance: total,
    varianceExplained: total > 0 ? kept / total : 1,
    solver,
  };
}

/**
 * The whole spectrum of the curves' covariance (every eigenvalue, and every curve's score on every
 * component), by the exact solver. The leave-one-out statistics (./loo.ts) need all of it.
 */
export interface FullSpectrum {
  /** The model of the leading components under `rule` (exact solver). */
  readonly model: FpcaModel;
  /** Eigenvalues of the covariance (divisor N − 1), descending, every one the data have (min(N, dim)). */
  readonly values: Float64Array;
  /** scores[k][i]: curve i's score on component k, for every component (signs as in `model`). */
  readonly scores: readonly Float64Array[];
  /** ‖x_i − m‖² in the weighted L2 norm, per curve. */
  readonly normsSq: Float64Array;
}

export function fitFpcaFull(curves: readonly Float64Array[], weights: Float64Array, rule: ComponentRule, options: { maxComponents?: number } = {}): FullSpectrum {
  const N = curves.length;
  if (N < 3) throw new RangeError(`fitFpcaFull: need at least 3 curves, got ${N}`);
  const { mean, rows, active } = centredWeighted(curves, weights);
  const dim = active.length;
  if (dim === 0) throw new RangeError('fitFpcaFull: no grid point has positive weight');
  const normsSq = Float64Array.from(rows, (y) => dot(y, y));
  let total = 0;
  for (const r of normsSq) total += r;
  total /= N - 1;
  const cap = Math.min(options.maxComponents ?? N - 2, N - 2, dim);
  const spectrum = exactSpectrum(rows, dim);
  const K = componentCount(spectrum.values, total, rule, cap);
  const model = modelFromSpectrum(spectrum, { mean, active, weights, total, n: N }, K, 'exact');
  const scores = spectrum.scores.map((s, k) => (k < K ? Float64Array.from(model.scores, (r) => r[k]) : s));
  return { model, values: spectrum.values, scores, normsSq };
}

/** Squared L2 distance, component scores, score distance and residual of a curve under a model. */
export interface CurveScores {
  readonly scores: Float64Array;
  /** ‖x − m‖² in the weighted L2 norm. */
  readonly l2sq: number;
  /** Σ ξ_k² / λ_k over the retained components (squared Mahalanobis distance on the scores). */
  readonly mahalanobisSq: number;
  /** ‖x − m‖² − Σ ξ_k²: the squared norm of what the retained components do not explain. */
  readonly residualSq: number;
}

/** Project any curve (on the same grid and weights) onto a fitted model. */
export function projectCurve(model: FpcaModel, x: Float64Array): CurveScores {
  const D = model.weights.length;
  let l2sq = 0;
  for (let d = 0; d < D; d++) {
    const r = x[d] - model.mean[d];
    l2sq += model.weights[d] * r * r;
  }
  const K = model.eigenvalues.length;
  const scores = new Float64Array(K);
  let explained = 0;
  let maha = 0;
  for (let k = 0; k < K; k++) {
    const phi = model.eigenfunctions[k];
    let s = 0;
    for (let d = 0; d < D; d++) s += model.weights[d] * (x[d] - model.mean[d]) * phi[d];
    scores[k] = s;
    explained += s * s;
    maha += (s * s) / model.eigenvalues[k];
  }
  return { scores, l2sq, mahalanobisSq: maha, residualSq: Math.max(0, l2sq - explained) };
}
