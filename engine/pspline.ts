/**
 * Penalized cubic B-spline smoothing (P-splines) with the smoothing parameter chosen by GCV.
 *
 * Method (Eilers & Marx, "Flexible smoothing with B-splines and penalties", Statistical Science
 * 11(2):89–121, 1996, doi:10.1214/ss/1038425655):
 *   minimise ‖y − B a‖² + λ ‖D₂ a‖²  ⇒  (BᵀB + λ D₂ᵀD₂) a = Bᵀy,
 * with B the uniform cubic basis of ./bspline.ts and D₂ the second-order difference matrix. Its
 * null space is the linear functions, which the fit therefore reproduces exactly at every λ.
 *
 * λ minimises the generalized cross-validation score (Craven & Wahba, Numer. Math. 31:377–403,
 * 1979, doi:10.1007/BF01404567) GCV(λ) = n·RSS(λ) / (n − edf(λ))², edf = tr(H) = tr(A⁻¹ BᵀB).
 *
 * Why by hand: the system matrix A = BᵀB + λP is banded (half-bandwidth 3), so each λ costs
 * O(K) with a banded LDLᵀ factorisation, and tr(A⁻¹BᵀB) needs only the entries of A⁻¹ inside the
 * band, which the Takahashi / Hutchinson–de Hoog recursion gives in O(K) as well (Hutchinson &
 * de Hoog, Numer. Math. 47:99–106, 1985, doi:10.1007/BF01389878). A dense general solver would
 * cost O(K³) per λ, and the whole baseline (thousands of tracks × channels) is smoothed this way.
 *
 * λ search: 13 points of log10(λ/λ₀) on [−6, 6] with λ₀ = tr(BᵀB)/tr(P) (a scale-free start),
 * then golden-section refinement in the bracket round the best grid point (a fixed 18 steps, which narrows the bracket to 0.3 % of its width).
 */
import { basisAt, type SplineBasis } from './bspline.js';

const BAND = 3;
const GRID_STEPS = 13;
const LOG_RANGE = 6;
const GOLDEN_STEPS = 18;

export interface PSplineFit {
  readonly coefficients: Float64Array;
  readonly lambda: number;
  /** Effective degrees of freedom tr(H). */
  readonly edf: number;
  readonly rss: number;
  readonly gcv: number;
  /** Residual standard deviation estimate sqrt(RSS / (n − edf)). */
  readonly sigma: number;
  readonly n: number;
}

/**
 * Normal equations of one data set, assembled once and reused for every λ:
 * G = BᵀB as a symmetric band (row i holds G[i][i+d] for d = 0..3), r = Bᵀy, and the sparse basis
 * rows at the sample times for computing residuals.
 */
export interface NormalEquations {
  readonly basis: SplineBasis;
  readonly n: number;
  readonly gBand: Float64Array;
  /** Bᵀ(y − ȳ): the data are centred, which is exact because constants lie in the penalty's null space. */
  readonly rhs: Float64Array;
  readonly y: Float64Array;
  readonly yMean: number;
  /** Σ (y − ȳ)², for the O(K) residual sum of squares used while searching λ. */
  readonly yy: number;
  readonly first: Int32Array;
  readonly rows: Float64Array;
}

export function normalEquations(basis: SplineBasis, t: Float64Array, y: Float64Array): NormalEquations {
  if (t.length !== y.length) throw new RangeError(`normalEquations: ${t.length} times but ${y.length} values`);
  const K = basis.size;
  const n = t.length;
  const gBand = new Float64Array(K * (BAND + 1));
  const rhs = new Float64Array(K);
  const first = new Int32Array(n);
  const rows = new Float64Array(4 * n);
  const b = new Float64Array(4);
  let yMean = 0;
  for (let i = 0; i < n; i++) yMean += y[i];
  yMean /= n;
  let yy = 0;
  for (let i = 0; i < n; i++) {
    const j = basisAt(basis, t[i], b);
    first[i] = j;
    rows.set(b, 4 * i);
    const yc = y[i] - yMean;
    yy += yc * yc;
    for (let p = 0; p < 4; p++) {
      rhs[j + p] += b[p] * yc;
      for (let q = p; q < 4; q++) gBand[(j + p) * (BAND + 1) + (q - p)] += b[p] * b[q];
    }
  }
  return { basis, n, gBand, rhs, y, yMean, yy, first, rows };
}

/** The second-difference penalty P = D₂ᵀD₂ as a symmetric band (same layout as G). */
export function differencePenaltyBand(K: number): Float64Array {
  const p = new Float64Array(K * (BAND + 1));
  const d = [1, -2, 1];
  for (let r = 0; r + 2 < K; r++) {
    for (let a = 0; a < 3; a++) {
      for (let c = a; c < 3; c++) p[(r + a) * (BAND + 1) + (c - a)] += d[a] * d[c];
    }
  }
  return p;
}

interface Factor {
  /** Unit lower factor, L[j][j−k] for k = 1..3 stored at l[j*3 + k − 1]. */
  readonly l: Float64Array;
  readonly d: Float64Array;
}

/** Banded LDLᵀ of A = G + λP. Throws if A is not positive definite to working precision. */
function factor(gBand: Float64Array, pBand: Float64Array, lambda: number, K: number): Factor {
  const W = BAND + 1;
  const l = new Float64Array(K * BAND);
  const d = new Float64Array(K);
  for (let j = 0; j < K; j++) {
    const lo = j - BAND > 0 ? j - BAND : 0;
    let diag = gBand[j * W] + lambda * pBand[j * W];
    for (let i = lo; i < j; i++) {
      // L[j][i] = (A[i][j] − Σ_{lo≤k<i} L[j][k] L[i][k] d[k]) / d[i]
      let s = gBand[i * W + (j - i)] + lambda * pBand[i * W + (j - i)];
      for (let k = lo; k < i; k++) s -= l[j * BAND + (j - k) - 1] * l[i * BAND + (i - k) - 1] * d[k];
      const lji = s / d[i];
      l[j * BAND + (j - i) - 1] = lji;
      diag -= lji * lji * d[i];
    }
    if (!(diag > 0)) throw new RangeError(`P-spline system not positive definite at pivot ${j} (λ = ${lambda})`);
    d[j] = diag;
  }
  return { l, d };
}

function solve(f: Factor, rhs: Float64Array, K: number): Float64Array {
  const x = Float64Array.from(rhs);
  for (let j = 0; j < K; j++) {
    for (let k = 1; k <= BAND && j - k >= 0; k++) x[j] -= f.l[j * BAND + k - 1] * x[j - k];
  }
  for (let j = 0; j < K; j++) x[j] /= f.d[j];
  for (let j = K - 1; j >= 0; j--) {
    for (let k = 1; k <= BAND && j + k < K; k++) x[j] -= f.l[(j + k) * BAND + k - 1] * x[j + k];
  }
  return x;
}

/**
 * tr(A⁻¹ G) from the band of Σ = A⁻¹ (Takahashi recursion, Hutchinson & de Hoog 1985):
 *   Σ[i][j] = −Σ_{k>i} L[k][i] Σ[k][j]   (j > i),    Σ[i][i] = 1/d[i] − Σ_{k>i} L[k][i] Σ[k][i].
 */
function traceInverseTimes(f: Factor, gBand: Float64Array, K: number): number {
  const W = BAND + 1;
  const sigma = new Float64Array(K * W); // Σ[i][i+dd] at sigma[i*W + dd]
  const l = f.l;
  let tr = 0;
  for (let i = K - 1; i >= 0; i--) {
    const hi = i + BAND < K ? i + BAND : K - 1;
    for (let j = hi; j > i; j--) {
      let s = 0;
      for (let k = i + 1; k <= hi; k++) {
        const skj = k <= j ? sigma[k * W + (j - k)] : sigma[j * W + (k - j)];
        s -= l[k * BAND + (k - i) - 1] * skj;
      }
      sigma[i * W + (j - i)] = s;
      tr += 2 * s * gBand[i * W + (j - i)];
    }
    let s = 1 / f.d[i];
    for (let k = i + 1; k <= hi; k++) s -= l[k * BAND + (k - i) - 1] * sigma[i * W + (k - i)];
    sigma[i * W] = s;
    tr += s * gBand[i * W];
  }
  return tr;
}

function residualSumOfSquares(eq: NormalEquations, a: Float64Array): number {
  let rss = 0;
  for (let i = 0; i < eq.n; i++) {
    const j = eq.first[i];
    const b = 4 * i;
    const f = eq.rows[b] * a[j] + eq.rows[b + 1] * a[j + 1] + eq.rows[b + 2] * a[j + 2] + eq.rows[b + 3] * a[j + 3];
    const r = eq.y[i] - eq.yMean - f;
    rss += r * r;
  }
  return rss;
}

/** RSS without a pass over the data: Σ(y−ȳ)² − 2aᵀBᵀ(y−ȳ) + aᵀGa for centred coefficients a. */
function fastResidualSumOfSquares(eq: NormalEquations, a: Float64Array): number {
  const W = BAND + 1;
  const K = eq.basis.size;
  let quad = 0;
  let cross = 0;
  for (let i = 0; i < K; i++) {
    cross += a[i] * eq.rhs[i];
    let row = eq.gBand[i * W] * a[i];
    for (let dd = 1; dd < W && i + dd < K; dd++) row += 2 * eq.gBand[i * W + dd] * a[i + dd];
    quad += a[i] * row;
  }
  return Math.max(0, eq.yy - 2 * cross + quad);
}

/**
 * Fit at one fixed λ. `exactRss` (default true) computes the residuals from the data; the λ search
 * uses the O(K) identity instead, which agrees to rounding on centred data.
 */
export function fitAtLambda(eq: NormalEquations, pBand: Float64Array, lambda: number, exactRss = true): PSplineFit {
  const K = eq.basis.size;
  const f = factor(eq.gBand, pBand, lambda, K);
  const centred = solve(f, eq.rhs, K);
  const edf = traceInverseTimes(f, eq.gBand, K);
  const rss = exactRss ? residualSumOfSquares(eq, centred) : fastResidualSumOfSquares(eq, centred);
  const coefficients = centred;
  for (let i = 0; i < K; i++) coefficients[i] += eq.yMean; // Σ_i B_i ≡ 1 restores the mean exactly
  const dof = eq.n - edf;
  const gcv = dof > 0 ? (eq.n * rss) / (dof * dof) : Number.POSITIVE_INFINITY;
  const sigma = dof > 0 ? Math.sqrt(rss / dof) : Number.NaN;
  return { coefficients, lambda, edf, rss, gcv, sigma, n: eq.n };
}

/** Minimum number of samples for a GCV fit: the cubic basis needs at least four. */
export const MIN_SAMPLES = 6;

/**
 * Smooth samples (t, y) on the basis, λ by GCV (see module comment). Times need not be sorted.
 */
export function smoothGcv(basis: SplineBasis, t: Float64Array, y: Float64Array, pBand?: Float64Array): PSplineFit {
  if (t.length < MIN_SAMPLES) throw new RangeError(`smoothGcv: need at least ${MIN_SAMPLES} samples, got ${t.length}`);
  const eq = normalEquations(basis, t, y);
  const P = pBand ?? differencePenaltyBand(basis.size);
  let trG = 0;
  let trP = 0;
  for (let i = 0; i < basis.size; i++) {
    trG += eq.gBand[i * (BAND + 1)];
    trP += P[i * (BAND + 1)];
  }
  const lambda0 = trG / trP;
  const at = (s: number): PSplineFit => fitAtLambda(eq, P, lambda0 * Math.pow(10, s), false);

  const step = (2 * LOG_RANGE) / (GRID_STEPS - 1);
  let best = at(-LOG_RANGE);
  let bestIndex = 0;
  for (let k = 1; k < GRID_STEPS; k++) {
    const fit = at(-LOG_RANGE + k * step);
    if (fit.gcv < best.gcv) {
      best = fit;
      bestIndex = k;
    }
  }
  // Golden-section search on [s_best − step, s_best + step], clipped to the grid's range.
  let lo = -LOG_RANGE + Math.max(0, bestIndex - 1) * step;
  let hi = -LOG_RANGE + Math.min(GRID_STEPS - 1, bestIndex + 1) * step;
  const g = (Math.sqrt(5) - 1) / 2;
  let x1 = hi - g * (hi - lo);
  let x2 = lo + g * (hi - lo);
  let f1 = at(x1);
  let f2 = at(x2);
  for (let k = 0; k < GOLDEN_STEPS; k++) {
    if (f1.gcv <= f2.gcv) {
      hi = x2; x2 = x1; f2 = f1;
      x1 = hi - g * (hi - lo); f1 = at(x1);
    } else {
      lo = x1; x1 = x2; f1 = f2;
      x2 = lo + g * (hi - lo); f2 = at(x2);
    }
  }
  for (const fit of [f1, f2]) if (fit.gcv < best.gcv) best = fit;
  return fitAtLambda(eq, P, best.lambda, true);
}
