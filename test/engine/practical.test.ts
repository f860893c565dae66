/**
 * Practical difference in physical units (engine/practical.ts): analytic cases, the integrals
 * against a brute-force integration of the same piecewise-linear curves, agreement with the bands of
 * engine/envelope.ts, and the demo's built-in truth.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { assessRun, buildBaseline } from '../../engine/assess.js';
import { simulatedEnvelope } from '../../engine/envelope.js';
import { uniformGrid } from '../../engine/grid.js';
import { practicalDifference } from '../../engine/practical.js';
import { createRng } from '../../engine/rng.js';
import type { ChannelSpec } from '../../engine/types.js';
import { generateScenario, HORIZON } from '../../ingest/demo/scenario.js';
import { parsePlan } from '../../ingest/plan.js';
import { binomialInterval, expectClose } from '../support/compare.js';
import { H, sampleBaseline, sampleTrack } from '../support/synthetic.js';

const grid = uniformGrid(100, 101); // step 1 s
const M = grid.points.length;
const all = new Uint8Array(M).fill(1);
const channels: ChannelSpec[] = [
  { name: 'range', unit: 'm', tolerance: 25 },
  { name: 'bearing', unit: 'deg' },
];

/** 41 simulated curves f + k, k = −20..20, on both channels (f = 2 t, g = 30). */
function offsets(): Float64Array[] {
  return Array.from({ length: 41 }, (_, i) => {
    const x = new Float64Array(2 * M);
    for (let g = 0; g < M; g++) {
      x[g] = 2 * grid.points[g] + (i - 20);
      x[M + g] = 30 + (i - 20) / 10;
    }
    return x;
  });
}

describe('analytic case: constant offsets, a triangular excursion', () => {
  // Hyndman–Fan type 7 of −20..20 at 2.5 % / 97.5 %: h = 40 · 0.025 = 1 → −19 and +19 exactly
  // (numpy.quantile(np.arange(-20, 21), [0.025, 0.975]) = [-19, 19]).
  // Run, channel 0: f + 39 · max(0, 1 − |t − 50|/10): above the band (f + 19) where the triangle
  // exceeds 19, i.e. |t − 50| < 10 · 20/39; the excess is a triangle of height 20 on that base.
  // Channel 1: 30 − 3 · max(0, 1 − |t − 20|/5): below the band (30 − 1.9) by a triangle of height
  // 1.1 on the base 5 · 2 · 1.1/3. The kinks fall on grid points, so the linear reading is exact.
  const run = new Float64Array(2 * M);
  for (let g = 0; g < M; g++) {
    const t = grid.points[g];
    run[g] = 2 * t + 39 * Math.max(0, 1 - Math.abs(t - 50) / 10);
    run[M + g] = 30 - 3 * Math.max(0, 1 - Math.abs(t - 20) / 5);
  }
  const [range, bearing] = practicalDifference(run, all, offsets(), grid, channels);

  it('band and mean', () => {
    for (const g of [0, 37, 100]) {
      expectClose(range.band.lower[g], 2 * grid.points[g] - 19, 1e-12, 1e-12, `lower[${g}]`);
      expectClose(range.band.upper[g], 2 * grid.points[g] + 19, 1e-12, 1e-12, `upper[${g}]`);
      expectClose(range.band.mean[g], 2 * grid.points[g], 1e-12, 1e-12, `mean[${g}]`);
    }
  });

  it('above the band: max excess 20 at 50 s, 2 · 200/39 s outside, 20 · 200/39 / 2 m·s', () => {
    const base = (2 * 10 * 20) / 39;
    expect(range.excursion.leaves).toBe(true);
    expectClose(range.excursion.maxExcess, 20, 1e-12, 1e-12, 'max excess');
    expect(range.excursion.maxExcessAt).toBe(50);
    expect(range.excursion.maxExcessSide).toBe('above');
    expectClose(range.excursion.timeOutside, base, 1e-12, 1e-12, 'time outside');
    expectClose(range.excursion.integratedExcess, (20 * base) / 2, 1e-12, 1e-12, 'integrated excess');
    expectClose(range.deviation.value, 39, 1e-12, 1e-12, 'max deviation');
    expect(range.deviation.at).toBe(50);
    expectClose(range.span, 100, 1e-12, 0, 'span');
  });

  it('below the band on the other channel, with its sign', () => {
    const base = (5 * 2 * 1.1) / 3;
    expectClose(bearing.excursion.maxExcess, 1.1, 1e-12, 1e-12, 'max excess');
    expect(bearing.excursion.maxExcessSide).toBe('below');
    expectClose(bearing.excursion.timeOutside, base, 1e-12, 1e-12, 'time outside');
    expectClose(bearing.excursion.integratedExcess, (1.1 * base) / 2, 1e-12, 1e-12, 'integrated excess');
    expectClose(bearing.deviation.value, -3, 1e-12, 1e-12, 'signed deviation');
  });

  it('tolerance: within when the excess is at most the tolerance, undefined without one', () => {
    expect(range.withinTolerance).toBe(true); // 20 ≤ 25
    expectClose(range.toleranceMargin!, 5, 1e-12, 1e-12, 'margin');
    expect(bearing.tolerance).toBeUndefined();
    expect(bearing.withinTolerance).toBeUndefined();
    const strict = practicalDifference(run, all, offsets(), grid, [{ ...channels[0], tolerance: 10 }, { ...channels[1], tolerance: 1.2 }]);
    expect(strict[0].withinTolerance).toBe(false);
    expectClose(strict[0].toleranceMargin!, -10, 1e-12, 1e-12, 'margin');
    expect(strict[1].withinTolerance).toBe(true); // 1.1 ≤ 1.2
  });

  it('a run inside the band: nothing outside, deviation still reported', () => {
    const inside = Float64Array.from(offsets()[25]);
    const [r] = practicalDifference(inside, all, offsets(), grid, channels);
    expect(r.excursion).toEqual({ leaves: false, maxExcess: 0, maxExcessAt: undefined, maxExcessSide: undefined, timeOutside: 0, integratedExcess: 0 });
    expectClose(r.deviation.value, 5, 1e-12, 1e-12, 'deviation');
  });
});

describe('the judged window', () => {
  it('ignores grid points outside it; a lone active point counts h/2', () => {
    const run = new Float64Array(2 * M);
    for (let g = 0; g < M; g++) run[g] = 2 * grid.points[g] + (g < 30 ? 1000 : 0);
    const active = new Uint8Array(M);
    for (let g = 40; g <= 60; g++) active[g] = 1;
    active[80] = 1;
    run[80] = 2 * 80 + 29; // 10 above the band at the lone point
    const [r] = practicalDifference(run, active, offsets(), grid, channels);
    expect(r.points).toBe(22);
    expectClose(r.span, 20.5, 1e-12, 0, 'span');
    expectClose(r.excursion.maxExcess, 10, 1e-12, 1e-12, 'excess at the lone point');
    expectClose(r.excursion.timeOutside, 0.5, 1e-12, 0, 'h/2');
    expectClose(r.excursion.integratedExcess, 5, 1e-12, 0, 'h/2 · 10');
    expect(Number.isNaN(r.band.lower[10])).toBe(true);
  });
});

describe('integrals against brute force (piecewise-linear run and band edges)', () => {
  it('time outside and integrated excess match a 4000-step midpoint integration', () => {
    const small = uniformGrid(10, 11);
    const m = small.points.length;
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 1_000_000 }), (seed) => {
        const rng = createRng(seed);
        const sims = Array.from({ length: 25 }, () => Float64Array.from({ length: m }, () => rng.normal()));
        const run = Float64Array.from({ length: m }, () => 2.5 * rng.normal());
        const [d] = practicalDifference(run, new Uint8Array(m).fill(1), sims, small, [{ name: 'x', unit: 'u' }]);
        let time = 0;
        let area = 0;
        const steps = 4000;
        for (let g = 0; g + 1 < m; g++) {
          for (let s = 0; s < steps; s++) {
            const f = (s + 0.5) / steps;
            const lin = (a: Float64Array) => (1 - f) * a[g] + f * a[g + 1];
            const e = Math.max(0, lin(run) - lin(d.band.upper), lin(d.band.lower) - lin(run));
            if (e > 0) time += 1 / steps;
            area += e / steps;
          }
        }
        expectClose(d.excursion.timeOutside, time, 0, 2e-3, 'time outside');
        expectClose(d.excursion.integratedExcess, area, 1e-4, 1e-6, 'integrated excess');
      }),
      { seed: 7, numRuns: 30 },
    );
  });
});

describe('agreement with engine/envelope.ts', () => {
  it('the same quantile definition: the 90 % band equals simulatedEnvelope’s 90 % pointwise band', () => {
    const rng = createRng(5);
    const sims = Array.from({ length: 57 }, () => Float64Array.from({ length: 2 * M }, () => rng.normal()));
    const env = simulatedEnvelope(sims, 2, 0.05);
    const diff = practicalDifference(sims[0], all, sims, grid, channels, { level: 0.9 });
    for (let c = 0; c < 2; c++) {
      const band = env[c].pointwise.find((b) => b.level === 0.9)!;
      for (let g = 0; g < M; g++) {
        expectClose(diff[c].band.lower[g], band.lower[g], 1e-15, 1e-15, `lower c${c} g${g}`);
        expectClose(diff[c].band.upper[g], band.upper[g], 1e-15, 1e-15, `upper c${c} g${g}`);
        expectClose(diff[c].band.mean[g], env[c].mean[g], 1e-12, 1e-12, `mean c${c} g${g}`);
      }
    }
  });
});

describe('why leaving a pointwise band is not a verdict (synthetic null runs)', () => {
  it('far more than 5 % of null runs leave the pointwise 95 % band somewhere over the window', () => {
    const settings = { alpha: 0.05, components: { kind: 'variance', fraction: 0.95 }, gridSize: 64, segments: 25, combination: 'fisher', gapFactor: 6 } as const;
    const chans: ChannelSpec[] = [
      { name: 'position', unit: 'm', tolerance: 5 },
      { name: 'angle', unit: 'deg', tolerance: 0.5 },
    ];
    const baseline = buildBaseline('V', H, chans, sampleBaseline(createRng(31), 99), settings);
    const rng = createRng(32);
    const reps = 60;
    let leaves = 0;
    let within = 0;
    for (let i = 0; i < reps; i++) {
      const a = assessRun(baseline, sampleTrack(rng, `null-${i}`));
      const d = practicalDifference(a.curve, a.active, baseline.curves, baseline.grid, chans);
      if (d.some((c) => c.excursion.leaves)) leaves++;
      if (d.every((c) => c.withinTolerance)) within++;
    }
    console.info(`practical: ${leaves} of ${reps} null runs leave the pointwise 95 % band somewhere; ${within} stay within band ± tolerance on both channels`);
    // Each of 2 × 64 correlated points is outside with probability 5 %, so a run leaves somewhere
    // far more often than 5 %: above the binomial 99 % band of 5 % (test/support/compare.ts).
    expect(leaves).toBeGreaterThan(binomialInterval(reps, 0.05, 0.99).hi);
  });
});

describe('the demo’s built-in truth (ingest/demo/scenario.ts header)', () => {
  it('the S3 live run is far out late in the run (header: about 130 m at 330 s): beyond the 25 m range tolerance', () => {
    const scenario = generateScenario({ simsPerVignette: 100 });
    const plan = parsePlan(JSON.stringify(scenario.planJson), 'demo.json');
    const vignette = 'S3-L2';
    const sims = scenario.baseline.filter((t) => t.vignette === vignette);
    const baseline = buildBaseline(vignette, HORIZON, plan.channels, sims, plan.analysis);
    const run = scenario.live.find((t) => t.vignette === vignette)!;
    const a = assessRun(baseline, run);
    const [range] = practicalDifference(a.curve, a.active, baseline.curves, baseline.grid, plan.channels);
    console.info(
      `practical, ${vignette} live-1 range: max deviation ${range.deviation.value.toFixed(1)} m at ${range.deviation.at.toFixed(0)} s; ` +
        `max excess ${range.excursion.maxExcess.toFixed(1)} m at ${range.excursion.maxExcessAt?.toFixed(0)} s; outside ${range.excursion.timeOutside.toFixed(0)} s`,
    );
    // Header: at t = 330 s about 130 m further out, simulated sd there about 29 m.
    expect(range.deviation.value).toBeGreaterThan(70);
    expect(range.deviation.at).toBeGreaterThan(250);
    expect(range.excursion.maxExcess).toBeGreaterThan(25);
    expect(range.withinTolerance).toBe(false);
  });
});

describe('arguments', () => {
  it('throws on mismatched shapes and too few simulations', () => {
    const sims = offsets();
    expect(() => practicalDifference(new Float64Array(3), all, sims, grid, channels)).toThrow(RangeError);
    expect(() => practicalDifference(sims[0], new Uint8Array(5), sims, grid, channels)).toThrow(RangeError);
    expect(() => practicalDifference(sims[0], all, sims.slice(0, 2), grid, channels)).toThrow(RangeError);
    expect(() => practicalDifference(sims[0], new Uint8Array(M), sims, grid, channels)).toThrow(RangeError);
  });
});
