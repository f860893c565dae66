import { describe, expect, it } from 'vitest';
import { applyBasis, basisAt, evaluateBasis, splineBasis } from '../../engine/bspline.js';
import { differencePenaltyBand, fitAtLambda, normalEquations, smoothGcv } from '../../engine/pspline.js';
import { createRng } from '../../engine/rng.js';
import { expectAllClose, expectClose } from '../support/compare.js';
import { section } from '../support/reference.js';

interface PsplineCase {
  H: number;
  nseg: number;
  x: number[];
  y: number[];
  fits: Array<{ lambda: number; coefficients: number[]; rss: number; edf: number; gcv: number }>;
  gcv_optimum: { lambda: number; gcv: number; edf: number; grid: number[]; fitted_on_grid: number[] };
  scipy_smoothing_spline?: { grid: number[]; fitted_on_grid: number[] };
}

const cases = section<Record<'sine' | 'gappy', PsplineCase>>('pspline');

describe('cubic B-spline basis', () => {
  it('is a partition of unity on [0, H] (analytic property of B-splines, de Boor 2001)', () => {
    const basis = splineBasis(7.5, 13);
    const out = new Float64Array(4);
    for (let k = 0; k <= 1000; k++) {
      basisAt(basis, (7.5 * k) / 1000, out);
      expectClose(out[0] + out[1] + out[2] + out[3], 1, 1e-14, 1e-14, `sum at ${k}`);
    }
  });
});

describe('P-spline at a fixed λ against a numpy implementation of the same definition', () => {
  for (const name of ['sine', 'gappy'] as const) {
    const c = cases[name];
    const basis = splineBasis(c.H, c.nseg);
    const eq = normalEquations(basis, Float64Array.from(c.x), Float64Array.from(c.y));
    const P = differencePenaltyBand(basis.size);
    for (const ref of c.fits) {
      it(`${name}, λ = ${ref.lambda}: coefficients, RSS, edf and GCV (fixture: numpy.linalg.solve)`, () => {
        const fit = fitAtLambda(eq, P, ref.lambda);
        // The gappy case's BᵀB has condition number ~1e7 (fixture note), so small λ loses digits.
        const rtol = name === 'gappy' && ref.lambda < 1 ? 1e-7 : 1e-9;
        expectAllClose(fit.coefficients, ref.coefficients, rtol, 1e-9, `${name} coefficients`);
        expectClose(fit.rss, ref.rss, rtol, 1e-12, `${name} rss`);
        expectClose(fit.edf, ref.edf, rtol, 1e-12, `${name} edf`);
        expectClose(fit.gcv, ref.gcv, rtol, 1e-12, `${name} gcv`);
      });
    }
  }
});

describe('GCV choice of λ', () => {
  for (const name of ['sine', 'gappy'] as const) {
    it(`${name}: reaches the GCV minimum of a 4001-point numpy grid search (fixture)`, () => {
      const c = cases[name];
      const basis = splineBasis(c.H, c.nseg);
      const fit = smoothGcv(basis, Float64Array.from(c.x), Float64Array.from(c.y));
      // Our search may land between grid points: its GCV can only be lower or equal (up to rounding).
      expect(fit.gcv).toBeLessThanOrEqual(c.gcv_optimum.gcv * (1 + 1e-9));
      expectClose(Math.log10(fit.lambda), Math.log10(c.gcv_optimum.lambda), 0, 0.02, `${name} log10 λ`);
      const ev = evaluateBasis(basis, Float64Array.from(c.gcv_optimum.grid));
      const curve = applyBasis(ev, fit.coefficients);
      expectAllClose(curve, c.gcv_optimum.fitted_on_grid, 0, 2e-3, `${name} fitted curve`);
    });
  }

  it('agrees with scipy.interpolate.make_smoothing_spline within a fraction of the noise (fixture)', () => {
    const c = cases.sine;
    const ref = c.scipy_smoothing_spline;
    if (!ref) throw new Error('fixture lacks scipy_smoothing_spline');
    const basis = splineBasis(c.H, c.nseg);
    const fit = smoothGcv(basis, Float64Array.from(c.x), Float64Array.from(c.y));
    const curve = applyBasis(evaluateBasis(basis, Float64Array.from(ref.grid)), fit.coefficients);
    // Different smoothers (knots at the data, ∫f''² penalty) chosen by the same criterion: they
    // must agree to a small fraction of the noise sd 0.2 of the fixture data.
    expectAllClose(curve, ref.fitted_on_grid, 0, 0.05 * 0.2, 'vs scipy smoothing spline');
  });

  it('reproduces a linear function exactly at every λ (null space of the second-difference penalty)', () => {
    const rng = createRng(7);
    const n = 80;
    const t = Float64Array.from({ length: n }, () => 50 * rng.uniform());
    const y = Float64Array.from(t, (s) => 3.25 - 0.7 * s);
    const basis = splineBasis(50, 17);
    const eq = normalEquations(basis, t, y);
    const P = differencePenaltyBand(basis.size);
    const grid = Float64Array.from({ length: 51 }, (_, i) => i);
    for (const lambda of [1e-4, 1, 1e3, 1e5]) {
      const curve = applyBasis(evaluateBasis(basis, grid), fitAtLambda(eq, P, lambda).coefficients);
      expectAllClose(curve, Float64Array.from(grid, (s) => 3.25 - 0.7 * s), 0, 1e-8, `linear at λ=${lambda}`);
    }
    const gcv = smoothGcv(basis, t, y);
    expect(gcv.rss).toBeLessThan(1e-16 * n);
  });

  it('estimates the noise level of a smooth signal (sigma within 10 % of the truth, 2000 samples)', () => {
    const rng = createRng(11);
    const n = 2000;
    const t = Float64Array.from({ length: n }, (_, i) => (360 * i) / (n - 1));
    const y = Float64Array.from(t, (s) => 1000 + 500 * Math.sin(s / 60) + 8 * rng.normal());
    const fit = smoothGcv(splineBasis(360, 40), t, y);
    expectClose(fit.sigma, 8, 0.1, 0, 'sigma');
  });

  it('refuses too few samples with a clear message', () => {
    expect(() => smoothGcv(splineBasis(10, 5), Float64Array.of(1, 2, 3), Float64Array.of(1, 2, 3))).toThrow(/at least 6 samples/);
  });
});
