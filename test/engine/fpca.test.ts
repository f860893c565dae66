import { describe, expect, it } from 'vitest';
import { fitFpca, projectCurve, type FpcaSolver } from '../../engine/fpca.js';
import { inSampleStatistics } from '../../engine/calibrate.js';
import { uniformGrid, fullWindow, windowWeights } from '../../engine/grid.js';
import { createRng } from '../../engine/rng.js';
import { expectAllClose, expectClose } from '../support/compare.js';
import { section } from '../support/reference.js';

interface FpcaCase {
  N: number;
  D: number;
  grid: number[];
  weights: number[];
  curves: number[][];
  mean: number[];
  eigenvalues: number[];
  eigenfunctions: number[][];
  scores: number[][];
  total_variance: number;
  mahalanobis_k3: number[];
  residual_sq_k3: number[];
}
interface MahalanobisCase { data: number[][]; mean: number[]; cov: number[][]; points: number[][]; distances: number[] }

const fixtures = section<Record<'brownian' | 'harmonic', FpcaCase>>('fpca');

describe('weighted FPCA against numpy.linalg.eigh (fixture test/fixtures/make_fixtures.py)', () => {
  for (const name of ['brownian', 'harmonic'] as const) {
    for (const solver of ['exact', 'randomized'] as FpcaSolver[]) {
      it(`${name}, ${solver} solver: mean, eigenvalues, eigenfunctions, scores, statistics`, () => {
        const c = fixtures[name];
        const curves = c.curves.map((r) => Float64Array.from(r));
        const model = fitFpca(curves, Float64Array.from(c.weights), { kind: 'fixed', count: 3 }, { solver, seed: 3 });
        // Randomized subspace iteration converges geometrically; leading triplets to ~1e-8 here.
        const rtol = solver === 'exact' ? 1e-10 : 1e-7;
        expect(model.solver).toBe(solver);
        expectAllClose(model.mean, c.mean, 1e-12, 1e-13, 'mean');
        expectClose(model.totalVariance, c.total_variance, 1e-12, 0, 'total variance');
        expectAllClose(model.eigenvalues, c.eigenvalues.slice(0, 3), rtol, 0, 'eigenvalues');
        for (let k = 0; k < 3; k++) {
          expectAllClose(model.eigenfunctions[k], c.eigenfunctions[k], 0, 1e3 * rtol, `eigenfunction ${k}`);
          expectAllClose(Float64Array.from(model.scores, (s) => s[k]), c.scores.map((s) => s[k]), 0, 1e3 * rtol * Math.sqrt(c.eigenvalues[0]), `scores ${k}`);
        }
        const stats = inSampleStatistics(model, curves);
        expectAllClose(Float64Array.from(stats.score, (s) => s * s), c.mahalanobis_k3, 1e3 * rtol, 1e-12, 'Mahalanobis k=3');
        expectAllClose(Float64Array.from(stats.residual, (s) => s * s), c.residual_sq_k3, 1e3 * rtol, 1e-10, 'residual k=3');
      });
    }
  }

  it('keeps the fewest components reaching the variance fraction (numpy eigenvalues)', () => {
    const c = fixtures.harmonic;
    const curves = c.curves.map((r) => Float64Array.from(r));
    for (const fraction of [0.5, 0.9, 0.99]) {
      let acc = 0;
      let want = 0;
      while (acc < fraction * c.total_variance) acc += c.eigenvalues[want++];
      const model = fitFpca(curves, Float64Array.from(c.weights), { kind: 'variance', fraction }, { solver: 'exact' });
      expect(model.eigenvalues.length, `fraction ${fraction}`).toBe(want);
      expect(model.varianceExplained).toBeGreaterThanOrEqual(fraction);
    }
  });
});

describe('Mahalanobis distance on all components equals the classical one (scipy.spatial.distance.mahalanobis fixture)', () => {
  for (const [i, c] of section<MahalanobisCase[]>('mahalanobis').entries()) {
    it(`case ${i}: ${c.data.length} observations in ${c.mean.length} dimensions`, () => {
      const dim = c.mean.length;
      const model = fitFpca(c.data.map((r) => Float64Array.from(r)), new Float64Array(dim).fill(1), { kind: 'fixed', count: dim }, { solver: 'exact' });
      expect(model.eigenvalues.length).toBe(dim);
      c.points.forEach((p, j) => {
        expectClose(Math.sqrt(projectCurve(model, Float64Array.from(p)).mahalanobisSq), c.distances[j], 1e-10, 0, `point ${j}`);
      });
    });
  }
});

/**
 * Karhunen–Loève expansions (analytic): standard Brownian motion on [0, 1] has eigenvalues
 * 1/((k − ½)²π²) and eigenfunctions √2 sin((k − ½)πt); the Brownian bridge 1/(k²π²) and
 * √2 sin(kπt) (e.g. Ash & Gardner, "Topics in Stochastic Processes", 1975, §1.4).
 */
function simulatePaths(n: number, size: number, bridge: boolean, seed: number): Float64Array[] {
  const rng = createRng(seed);
  const h = 1 / (size - 1);
  return Array.from({ length: n }, () => {
    const w = new Float64Array(size);
    for (let i = 1; i < size; i++) w[i] = w[i - 1] + Math.sqrt(h) * rng.normal();
    if (bridge) {
      const end = w[size - 1];
      for (let i = 0; i < size; i++) w[i] -= i * h * end;
    }
    return w;
  });
}

describe('Karhunen–Loève recovery from simulated paths (Monte Carlo tolerance)', () => {
  const N = 3000;
  const grid = uniformGrid(1, 201);
  const weights = windowWeights(grid, fullWindow(1));
  for (const bridge of [false, true]) {
    const label = bridge ? 'Brownian bridge' : 'Brownian motion';
    it(`${label}: first four eigenvalues and two eigenfunctions`, () => {
      const paths = simulatePaths(N, grid.points.length, bridge, bridge ? 21 : 20);
      const model = fitFpca(paths, weights, { kind: 'fixed', count: 4 }, { solver: 'randomized', seed: 5 });
      for (let k = 1; k <= 4; k++) {
        const truth = bridge ? 1 / (k * k * Math.PI ** 2) : 1 / ((k - 0.5) ** 2 * Math.PI ** 2);
        // sd of a sample eigenvalue of Gaussian data is about λ·√(2/N) (Anderson 1963); 4 sd.
        expectClose(model.eigenvalues[k - 1], truth, 4 * Math.sqrt(2 / N), 0, `${label} λ${k}`);
      }
      for (let k = 1; k <= 2; k++) {
        const freq = bridge ? k : k - 0.5;
        // Eigenfunctions are defined up to sign: compare with the closer of ±φ.
        let plus = 0;
        let minus = 0;
        for (let i = 0; i < grid.points.length; i++) {
          const truth = Math.SQRT2 * Math.sin(freq * Math.PI * grid.points[i]);
          const est = model.eigenfunctions[k - 1][i];
          plus += weights[i] * (est - truth) ** 2;
          minus += weights[i] * (est + truth) ** 2;
        }
        const dist = Math.min(plus, minus);
        expect(Math.sqrt(dist), `${label} φ${k} L2 error`).toBeLessThan(0.1);
      }
    });
  }
});

describe('solvers', () => {
  it('randomized and exact agree on leading eigenvalues of smooth curves (seeded, 300 × 256)', () => {
    const rng = createRng(99);
    const D = 256;
    const curves = Array.from({ length: 300 }, () => {
      const a = Array.from({ length: 12 }, (_, k) => rng.normal() / (k + 1) ** 1.5);
      return Float64Array.from({ length: D }, (_, d) => a.reduce((s, ak, k) => s + ak * Math.cos((k * Math.PI * d) / (D - 1)), 0) + 0.01 * rng.normal());
    });
    const w = new Float64Array(D).fill(1 / D);
    const exact = fitFpca(curves, w, { kind: 'variance', fraction: 0.99 }, { solver: 'exact' });
    const fast = fitFpca(curves, w, { kind: 'variance', fraction: 0.99 }, { solver: 'randomized', seed: 1 });
    expect(fast.eigenvalues.length).toBe(exact.eigenvalues.length);
    expectAllClose(fast.eigenvalues, exact.eigenvalues, 1e-6, 0, 'eigenvalues');
    expectClose(fast.totalVariance, exact.totalVariance, 1e-13, 0, 'total variance');
  });

  it('is permutation-equivariant: reordering the curves permutes the statistics (needed for exchangeability)', () => {
    const c = fixtures.harmonic;
    const curves = c.curves.map((r) => Float64Array.from(r));
    const w = Float64Array.from(c.weights);
    const rule = { kind: 'variance', fraction: 0.95 } as const;
    const a = inSampleStatistics(fitFpca(curves, w, rule, { solver: 'randomized', seed: 8 }), curves);
    const perm = curves.map((_, i) => (i * 7) % curves.length);
    const permuted = perm.map((i) => curves[i]);
    const b = inSampleStatistics(fitFpca(permuted, w, rule, { solver: 'randomized', seed: 8 }), permuted);
    perm.forEach((i, j) => {
      expectClose(b.score[j], a.score[i], 1e-8, 1e-10, `score ${i}`);
      expectClose(b.residual[j], a.residual[i], 1e-8, 1e-10, `residual ${i}`);
    });
  });

  it('refuses too few curves and an empty window', () => {
    expect(() => fitFpca([new Float64Array(3), new Float64Array(3)], new Float64Array(3).fill(1), { kind: 'fixed', count: 1 })).toThrow(/at least 3 curves/);
    expect(() => fitFpca([new Float64Array(3), new Float64Array(3), new Float64Array(3)], new Float64Array(3), { kind: 'fixed', count: 1 })).toThrow(/positive weight/);
  });
});
