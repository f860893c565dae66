/**
 * Leave-one-out statistics of every curve of a sample: curve i judged by the FPCA model of the
 * other N − 1 curves, for all i, from one eigendecomposition.
 *
 * Method. Let Y be the N centred, weighted curves (./fpca.ts) with scatter S = YᵀY = Σ_j μ_j v_j v_jᵀ
 * (μ_j = (N − 1) λ_j) and u_i = y_i its i-th row, with coordinates z_ij = ⟨u_i, v_j⟩ = ξ_ij (the
 * in-sample scores on every component). Removing curve i moves the mean to
 * m₋ᵢ = m − u_i/(N − 1) and leaves the scatter
 *     S₋ᵢ = S − c u_i u_iᵀ,   c = N/(N − 1),
 * a symmetric rank-one downdate. Its eigenvalues ν are the roots of the secular equation
 *     g(ν) = 1/c − Σ_j z_ij² / (μ_j − ν) = 0,
 * one in each interval (μ_{j+1}, μ_j) of the components with z_ij ≠ 0 (interlacing), and its
 * eigenvector for ν is w ∝ Σ_j z_ij/(μ_j − ν) v_j (Golub, "Some modified matrix eigenvalue
 * problems", SIAM Review 15(2):318–334, 1973, doi:10.1137/1015032; Bunch, Nielsen & Sorensen,
 * "Rank-one modification of the symmetric eigenproblem", Numer. Math. 31:31–48, 1978,
 * doi:10.1007/BF01396012). Components with z_ij ≈ 0 are deflated: they keep μ_j, and curve i has
 * no score on them. The deviation of curve i from the other curves' mean is
 * x_i − m₋ᵢ = c u_i, so its score on w is c⟨u_i, w⟩ = 1/‖(z_ij/(μ_j − ν))_j‖ (using g(ν) = 0),
 * and with λ = ν/(N − 2) the covariance eigenvalue of the N − 1 curves:
 *     l2²       = c² ‖u_i‖²
 *     score²    = Σ_{k≤K} ξ_k² / λ_k
 *     residual² = l2² − Σ_{k≤K} ξ_k²
 * for the K leading roots (K fixed by the caller). Each curve costs O(K · r · iterations) with r
 * the number of components, instead of a new eigendecomposition.
 *
 * The roots are found by safeguarded Newton steps inside their bracket (bisection whenever a Newton
 * step leaves it), at most `MAX_ITERATIONS` steps per root.
 */

export const MAX_ITERATIONS = 200;

export interface LooStatistics {
  readonly l2: Float64Array;
  readonly score: Float64Array;
  readonly residual: Float64Array;
}

export interface SpectrumInput {
  /** Covariance eigenvalues (divisor N − 1), descending. */
  readonly values: Float64Array;
  /** scores[j][i]: curve i's score on component j, for every component. */
  readonly scores: readonly Float64Array[];
  /** ‖x_i − m‖², per curve. */
  readonly normsSq: Float64Array;
}

/**
 * The K leading leave-one-out eigenvalues of S − c·u·uᵀ and the curve's scores on them, given the
 * eigenvalues mu (descending) of S and the coordinates z of u in its eigenbasis.
 * Writes K roots to `nu` and squared scores (of u itself, before the factor c) to `xiSq`.
 */
export function downdateLeading(mu: Float64Array, z: Float64Array, c: number, K: number, nu: Float64Array, xiSq: Float64Array): void {
  const r = mu.length;
  const top = mu[0] > 0 ? mu[0] : 1;
  // Deflation: components on which u has (numerically) no weight keep their eigenvalue.
  let zz = 0;
  for (let j = 0; j < r; j++) zz += z[j] * z[j];
  const keep: number[] = [];
  const deflated: number[] = [];
  for (let j = 0; j < r; j++) {
    if (c * z[j] * z[j] > 1e-15 * top && mu[j] > -1e-300) keep.push(j);
    else deflated.push(mu[j]);
  }
  const m = keep.length;
  const muK = Float64Array.from(keep, (j) => mu[j]);
  const z2 = Float64Array.from(keep, (j) => z[j] * z[j]);
  const roots: Array<{ nu: number; xiSq: number }> = [];
  const want = Math.min(K, m);
  for (let k = 0; k < want; k++) {
    const hi0 = muK[k];
    const lo0 = k + 1 < m ? muK[k + 1] : muK[k] - c * zz;
    let lo = lo0;
    let hi = hi0;
    let x = 0.5 * (lo + hi);
    if (!(hi - lo > 1e-15 * top)) {
      roots.push({ nu: x, xiSq: 0 });
      continue;
    }
    for (let it = 0; it < MAX_ITERATIONS; it++) {
      let g = 1 / c;
      let dg = 0;
      for (let j = 0; j < m; j++) {
        const d = muK[j] - x;
        const t = z2[j] / d;
        g -= t;
        dg -= t / d;
      }
      // g decreases from +∞ (just above lo) to −∞ (just below hi)... with the sign of g(ν) = 1/c − Σ:
      // near hi the term j = k → +∞ so g → −∞; near lo the term j = k + 1 → −∞ so g → +∞.
      if (g > 0) lo = x;
      else hi = x;
      let next = x - g / dg;
      if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
      if (Math.abs(next - x) <= 4e-16 * Math.max(Math.abs(x), 1e-300) || hi - lo <= 4e-16 * Math.max(Math.abs(hi), 1e-300)) {
        x = next;
        break;
      }
      x = next;
    }
    let s = 0;
    for (let j = 0; j < m; j++) {
      const d = muK[j] - x;
      s += z2[j] / (d * d);
    }
    roots.push({ nu: x, xiSq: s > 0 && Number.isFinite(s) ? 1 / s : 0 });
  }
  for (const d of deflated) roots.push({ nu: d, xiSq: 0 });
  roots.sort((a, b) => b.nu - a.nu);
  for (let k = 0; k < K; k++) {
    nu[k] = k < roots.length ? roots[k].nu : 0;
    xiSq[k] = k < roots.length ? roots[k].xiSq : 0;
  }
}

/**
 * Every curve's statistics under the model of the other N − 1 curves with K components (see the
 * module comment). A component whose leave-one-out eigenvalue is not positive contributes no score
 * distance (it cannot be a component the rule keeps).
 */
export function leaveOneOutStatistics(spectrum: SpectrumInput, K: number): LooStatistics {
  const N = spectrum.normsSq.length;
  if (N < 4) throw new RangeError(`leaveOneOutStatistics: need at least 4 curves, got ${N}`);
  const r = spectrum.values.length;
  const mu = Float64Array.from(spectrum.values, (v) => Math.max(v, 0) * (N - 1));
  const c = N / (N - 1);
  const l2 = new Float64Array(N);
  const score = new Float64Array(N);
  const residual = new Float64Array(N);
  const z = new Float64Array(r);
  const nu = new Float64Array(K);
  const xiSq = new Float64Array(K);
  const top = mu[0] > 0 ? mu[0] : 1;
  for (let i = 0; i < N; i++) {
    for (let j = 0; j < r; j++) z[j] = spectrum.scores[j][i];
    downdateLeading(mu, z, c, K, nu, xiSq);
    const l2sq = c * c * spectrum.normsSq[i];
    let explained = 0;
    let maha = 0;
    for (let k = 0; k < K; k++) {
      // The score of x_i − m₋ᵢ = c·u_i on w_k is c⟨u_i, w_k⟩ = 1/‖ỹ‖, i.e. xiSq[k] is already it.
      const xi2 = xiSq[k];
      explained += xi2;
      const lambda = nu[k] / (N - 2);
      if (lambda > 1e-12 * (top / (N - 1))) maha += xi2 / lambda;
    }
    l2[i] = Math.sqrt(l2sq);
    score[i] = Math.sqrt(maha);
    residual[i] = Math.sqrt(Math.max(0, l2sq - explained));
  }
  return { l2, score, residual };
}
