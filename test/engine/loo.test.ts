/**
 * Leave-one-out statistics by rank-one downdates (engine/loo.ts) against their definition: the
 * model refitted from scratch on the other N − 1 curves (engine/fpca.ts, exact solver, same K), the
 * curve projected on it. Reference: the definition itself (an independent computation path: a new
 * eigendecomposition per curve instead of the secular equation); eigenvalue interlacing (Cauchy
 * interlacing theorem, e.g. Golub & Van Loan, "Matrix Computations", 4th ed., Thm 8.1.7).
 */
import { describe, expect, it } from 'vitest';
import { fitFpca, fitFpcaFull, projectCurve } from '../../engine/fpca.js';
import { downdateLeading, leaveOneOutStatistics } from '../../engine/loo.js';
import { createRng } from '../../engine/rng.js';

function randomCurves(seed: number, n: number, dim: number, modes: number): { curves: Float64Array[]; weights: Float64Array } {
  const rng = createRng(seed);
  const basis = Array.from({ length: modes }, (_, k) => Float64Array.from({ length: dim }, (_, d) => Math.sin(((k + 1) * Math.PI * (d + 0.5)) / dim)));
  const curves = Array.from({ length: n }, () => {
    const x = new Float64Array(dim);
    for (let k = 0; k < modes; k++) {
      const a = rng.normal() * 3 * Math.pow(0.6, k);
      for (let d = 0; d < dim; d++) x[d] += a * basis[k][d];
    }
    for (let d = 0; d < dim; d++) x[d] += 0.05 * rng.normal();
    return x;
  });
  const weights = Float64Array.from({ length: dim }, (_, d) => (d === 0 || d === dim - 1 ? 0.5 : 1) / (dim - 1));
  return { curves, weights };
}

describe('leave-one-out statistics by downdating', () => {
  for (const [n, dim, K] of [
    [30, 20, 4],
    [15, 40, 6],
    [60, 12, 11],
  ] as const) {
    it(`equal a refit on N − 1 curves (N = ${n}, ${dim} grid values, K = ${K}) to 1e-8 relative`, () => {
      const { curves, weights } = randomCurves(n * 7 + dim, n, dim, 8);
      const full = fitFpcaFull(curves, weights, { kind: 'fixed', count: K });
      expect(full.model.eigenvalues.length).toBe(K);
      const loo = leaveOneOutStatistics(full, K);
      for (let i = 0; i < n; i++) {
        const rest = curves.filter((_, j) => j !== i);
        const m = fitFpca(rest, weights, { kind: 'fixed', count: K }, { solver: 'exact' });
        const pr = projectCurve(m, curves[i]);
        const want = { l2: Math.sqrt(pr.l2sq), score: Math.sqrt(pr.mahalanobisSq), residual: Math.sqrt(pr.residualSq) };
        for (const s of ['l2', 'score', 'residual'] as const) {
          const got = loo[s][i];
          const tol = 1e-8 * Math.max(1, Math.abs(want[s])) + 1e-9 * want.l2;
          if (Math.abs(got - want[s]) > tol) throw new Error(`curve ${i} ${s}: got ${got}, want ${want[s]}, diff ${got - want[s]}, tol ${tol}`);
        }
      }
    });
  }

  it('downdated eigenvalues interlace with the originals and match a dense eigendecomposition', () => {
    const mu = Float64Array.from([10, 7, 4, 2, 1, 0.5]);
    const z = Float64Array.from([0.8, -0.3, 1.1, 0, 0.4, 0.2]);
    const c = 1.25;
    const nu = new Float64Array(5);
    const xi = new Float64Array(5);
    downdateLeading(mu, z, c, 5, nu, xi);
    // Dense check: eigenvalues of diag(mu) − c z zᵀ by Jacobi rotations (textbook algorithm,
    // Golub & Van Loan §8.5), written here independently of the engine.
    const n = mu.length;
    const a = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (_, j) => (i === j ? mu[i] : 0) - c * z[i] * z[j]));
    for (let sweep = 0; sweep < 60; sweep++) {
      for (let p = 0; p < n; p++) {
        for (let q = p + 1; q < n; q++) {
          if (Math.abs(a[p][q]) < 1e-300) continue;
          const theta = (a[q][q] - a[p][p]) / (2 * a[p][q]);
          const t = Math.sign(theta || 1) / (Math.abs(theta) + Math.sqrt(theta * theta + 1));
          const cs = 1 / Math.sqrt(t * t + 1);
          const sn = t * cs;
          for (let k = 0; k < n; k++) {
            const akp = a[k][p];
            const akq = a[k][q];
            a[k][p] = cs * akp - sn * akq;
            a[k][q] = sn * akp + cs * akq;
          }
          for (let k = 0; k < n; k++) {
            const apk = a[p][k];
            const aqk = a[q][k];
            a[p][k] = cs * apk - sn * aqk;
            a[q][k] = sn * apk + cs * aqk;
          }
        }
      }
    }
    const dense = a.map((row, i) => row[i]).sort((x, y) => y - x);
    for (let k = 0; k < 5; k++) {
      expect(Math.abs(nu[k] - dense[k])).toBeLessThan(1e-10);
      // Interlacing for a downdate: mu_{k+1} ≤ nu_k ≤ mu_k.
      expect(nu[k]).toBeLessThanOrEqual(mu[k] + 1e-12);
      expect(nu[k]).toBeGreaterThanOrEqual(mu[k + 1] - 1e-12);
    }
    // z_3 = 0: the eigenvalue 2 stays, with no score on it.
    expect(Array.from(nu).some((v, k) => Math.abs(v - 2) < 1e-12 && xi[k] === 0)).toBe(true);
  });
});
