/**
 * Registration (engine/registration.ts) on analytic curves: a known delay and a known piecewise-
 * linear warp are recovered within the resolution the method states; the warp is monotone with its
 * slopes in bounds; the split-conformal interval has the order statistics and the coverage of Lei
 * et al. (JASA 2018, doi:10.1080/01621459.2017.1307307): for N exchangeable reference errors and a
 * continuous law, coverage (k_hi − k_lo)/(N + 1), at least 1 − α.
 */
import { describe, expect, it } from 'vitest';
import { fullWindow, uniformGrid, windowWeights } from '../../engine/grid.js';
import {
  MIN_SLOPE,
  lagAt,
  lagAtEnd,
  lagBuildUp,
  largestLag,
  predictionInterval,
  registerShift,
  registerWarp,
  warpDistance,
  warpedCurve,
  WARP_SEGMENTS,
  type RegistrationTarget,
} from '../../engine/registration.js';
import { createRng } from '../../engine/rng.js';
import { binomialInterval, expectClose } from '../support/compare.js';
import { warpInverse } from '../support/synthetic.js';

const HORIZON = 200;
const grid = uniformGrid(HORIZON, 201); // step 1 s
const M = grid.points.length;
const window = windowWeights(grid, fullWindow(HORIZON));

/** Two smooth analytic channels (invented test signals). */
function f(c: number, t: number): number {
  return c === 0 ? 30 * Math.sin((2 * Math.PI * t) / 80) + 10 * Math.cos((2 * Math.PI * t) / 37) : 5 * Math.tanh((t - 100) / 10) + 0.02 * t;
}

/** Channel blocks of g(c, t_g). */
function sample(g: (c: number, t: number) => number): Float64Array {
  const out = new Float64Array(2 * M);
  for (let c = 0; c < 2; c++) for (let i = 0; i < M; i++) out[c * M + i] = g(c, grid.points[i]);
  return out;
}

const mean = sample(f);
const joined = Float64Array.from({ length: 2 * M }, (_, d) => window[d % M]);
const target = (span: number): RegistrationTarget => ({ target: mean, window, joined, grid, span });

describe('shift registration', () => {
  // Lattice step Δt/4, then one parabolic step clamped to half a lattice step: the minimiser of the
  // sampled criterion is found to within Δt/8 (here the exact delay is that minimiser up to the
  // linear interpolation between grid points).
  for (const tau of [5.3, 40, -35, 57.5]) {
    it(`a curve delayed by ${tau} s is registered at τ̂ = ${tau} s within Δt/8 (span 60 s)`, () => {
      const late = sample((c, t) => f(c, t - tau));
      const fit = registerShift(late, target(60));
      expectClose(fit.shift, tau, 0, grid.step / 8, 'τ̂');
      expect(fit.atLimit).toBe(false);
      expect(fit.ratio).toBeLessThan(1e-3);
    });
  }

  it('a span below the delay stops at its edge (the search is bounded by the span, not by a fixed 30 s)', () => {
    const late = sample((c, t) => f(c, t - 40));
    const fit = registerShift(late, target(30));
    expect(fit.atLimit).toBe(true);
    expect(Math.abs(fit.shift)).toBeLessThanOrEqual(30 + grid.step / 8);
  });
});

describe('monotone warp registration', () => {
  // Knots of the warp: WARP_SEGMENTS + 1 equally spaced over [0, 200]; a lag that is 0 up to the
  // third knot, grows linearly to 30 s at the fifth and stays there is exactly representable.
  const knots = Float64Array.from({ length: WARP_SEGMENTS + 1 }, (_, j) => (HORIZON * j) / WARP_SEGMENTS);
  const truth = { lag: 30, from: knots[2], to: knots[4] };
  const lagTrue = (s: number): number => (s <= truth.from ? 0 : s >= truth.to ? truth.lag : (truth.lag * (s - truth.from)) / (truth.to - truth.from));
  const curve = sample((c, t) => f(c, warpInverse(t, truth)));

  it('recovers the lags at the knots within Δt/2, the lag at the end, and where it builds up', () => {
    const shift = registerShift(curve, target(60));
    const fit = registerWarp(curve, target(60), shift.shift);
    expect(fit.converged).toBe(true);
    Array.from(fit.knots).forEach((s, j) => expectClose(s, knots[j], 1e-12, 1e-9, `knot ${j}`));
    // The search step floor is Δt/8; on a sampled curve the knots settle within a few floors.
    fit.lags.forEach((v, j) => {
      // The last knot's lag only matters for points whose warped time lies in the window: h(200) > 200.
      if (j < WARP_SEGMENTS) expectClose(v, lagTrue(knots[j]), 0, grid.step / 2, `δ at knot ${j}`);
    });
    expectClose(lagAtEnd(fit), truth.lag, 0, grid.step / 2, 'lag at the end');
    expectClose(largestLag(fit), truth.lag, 0, grid.step / 2, 'largest lag');
    // The lag changes from 0 to 30 s between s = 66.7 and 133.3: 10 % of the change reached at
    // s = 73.3 (run time 76.3), 90 % at s = 126.7 (run time 153.7).
    const [from, to] = lagBuildUp(fit);
    expectClose(from, 73.33 + 3, 0, 2, 'lag 10 % built up (run time)');
    expectClose(to, 126.67 + 27, 0, 2, 'lag 90 % built up (run time)');
    // The warp explains what a shift cannot.
    expect(fit.ratio).toBeLessThan(0.01);
    expect(shift.ratio).toBeGreaterThan(0.05);
    expect(warpDistance(curve, target(60), fit).d).toBeLessThan(warpDistance(curve, target(60), { knots: fit.knots, lags: new Float64Array(WARP_SEGMENTS + 1).fill(shift.shift) }).d);
    // Read through the warp, the curve is the target wherever it is compared.
    const back = warpedCurve(curve, mean, window, grid, (s) => lagAt(fit, s));
    let worst = 0;
    for (let g = 0; g < M; g++) if (back.weights[g] > 0) for (let c = 0; c < 2; c++) worst = Math.max(worst, Math.abs(back.curve[c * M + g] - mean[c * M + g]));
    expect(worst).toBeLessThan(2);
  });

  it('a pure delay is a warp with equal lags: the lag builds up at the start of the window', () => {
    const late = sample((c, t) => f(c, t - 12));
    const fit = registerWarp(late, target(60), registerShift(late, target(60)).shift);
    expectClose(lagAtEnd(fit), 12, 0, grid.step / 2, 'lag at the end');
    const [from, to] = lagBuildUp(fit);
    expectClose(from, 12, 0, grid.step, 'built up at the window start (run time a + 12)');
    expectClose(to, 12, 0, grid.step, 'built up at the window start (run time a + 12)');
  });

  it('on curves of pure noise the fitted warp keeps every slope in [MIN_SLOPE, 1/MIN_SLOPE] and |δ| ≤ span', () => {
    const rng = createRng(5);
    for (let k = 0; k < 20; k++) {
      const noise = Float64Array.from({ length: 2 * M }, () => 10 * rng.normal());
      const fit = registerWarp(noise, target(40), 20 * (rng.uniform() - 0.5));
      for (let j = 0; j < WARP_SEGMENTS; j++) {
        const slope = 1 + (fit.lags[j + 1] - fit.lags[j]) / (fit.knots[j + 1] - fit.knots[j]);
        expect(slope).toBeGreaterThanOrEqual(MIN_SLOPE - 1e-9);
        expect(slope).toBeLessThanOrEqual(1 / MIN_SLOPE + 1e-9);
      }
      for (const v of fit.lags) expect(Math.abs(v)).toBeLessThanOrEqual(40 + 1e-9);
    }
  });

  it('rejects curves of the wrong shape', () => {
    expect(() => registerWarp(new Float64Array(5), target(10))).toThrow(RangeError);
    expect(() => registerShift(new Float64Array(5), target(10))).toThrow(RangeError);
    expect(() => registerShift(curve, target(-1))).toThrow(RangeError);
  });
});

describe('split-conformal interval', () => {
  it('uses the order statistics k_lo = ⌊(N + 1) α/2⌋ and k_hi = ⌈(N + 1)(1 − α/2)⌉', () => {
    const reference = Array.from({ length: 99 }, (_, i) => 99 - i); // 1..99 in any order
    // N = 99, α = 0.1: k_lo = 5, k_hi = 95.
    expect(predictionInterval(100, reference, 0.1)).toEqual([100 - 95, 100 - 5]);
    // Too few references for the level: infinite ends.
    expect(predictionInterval(0, [1, 2, 3], 0.05)).toEqual([Number.NEGATIVE_INFINITY, Number.POSITIVE_INFINITY]);
    expect(() => predictionInterval(0, reference, 0)).toThrow(RangeError);
  });

  it('covers the true value at the rate (k_hi − k_lo)/(N + 1) for exchangeable errors (binomial 99 % band)', () => {
    const rng = createRng(17);
    const N = 39;
    const alpha = 0.1; // k_lo = 2, k_hi = 38: coverage 36/40 = 0.9
    const reps = 2000;
    let covered = 0;
    for (let r = 0; r < reps; r++) {
      const truth = 7;
      const errors = Array.from({ length: N }, () => rng.normal() * 3);
      const [lo, hi] = predictionInterval(truth + rng.normal() * 3, errors, alpha);
      if (lo <= truth && truth <= hi) covered++;
    }
    const band = binomialInterval(reps, 36 / 40, 0.99);
    console.info(`split-conformal coverage, N = ${N}, α = ${alpha}: ${covered} of ${reps} (band ${band.lo}..${band.hi})`);
    expect(covered).toBeGreaterThanOrEqual(band.lo);
    expect(covered).toBeLessThanOrEqual(band.hi);
  });
});
