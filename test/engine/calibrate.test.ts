/**
 * Validity and power of the per-run p-values. All data are synthetic (test/support/synthetic.ts);
 * the acceptance bands are exact binomial intervals around the nominal level (common practice for
 * Monte Carlo size checks).
 */
import { describe, expect, it } from 'vitest';
import { assessRun, buildBaseline, curvesForWindow, smoothTrack, type Baseline } from '../../engine/assess.js';
import { buildReference, channelScales, inSampleStatistics, joinedWeights, judgeAgainst, rankPValue } from '../../engine/calibrate.js';
import { combineStatistics, type RunPValues } from '../../engine/combine-statistics.js';
import { fitFpca, projectCurve } from '../../engine/fpca.js';
import { fullWindow, windowWeights } from '../../engine/grid.js';
import { createRng, seedFor } from '../../engine/rng.js';
import type { RawTrack } from '../../engine/types.js';
import { binomialInterval, binomialMass } from '../support/compare.js';
import { SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, H, sampleBaseline, sampleTrack, type Discrepancy, type SampleOptions } from '../support/synthetic.js';

const channels = SYNTHETIC_CHANNELS;
const settings = SYNTHETIC_SETTINGS;
const N_SIMS = 99;
const ALPHA = 0.05;
const STATS = ['l2', 'score', 'residual', 'overall'] as const;

/**
 * Size checks: 2,000 seeded null repetitions per check, acceptance [75, 125] rejections at α = 0.05
 * (the two-sided 99 % exact binomial interval of Binomial(2000, 0.05), computed by
 * binomialInterval; common practice for Monte Carlo size checks). Power of each check against a
 * factor-2 miscalibration (exact binomial, computed with the same helper): a procedure at 2.5 %
 * (mean 50) reaches 75 with probability < 1e-3, one at 10 % (mean 200) stays at or below 125 with
 * probability < 1e-8; a correct procedure is inside with probability ≥ 99 % per statistic.
 */
const SIZE_REPS = 2000;
const SIZE_BAND = { lo: 75, hi: 125 };

/**
 * Validity is a statement about the joint draw of the baseline and the live run: conditional on
 * one fixed baseline the rejection rate of any rank test varies (about Beta(5, 95) for N = 99).
 * So each repetition draws a fresh baseline: N + 1 distinct tracks from a pool of simulated
 * tracks (smoothed once), the first N as the baseline and the last as the live run.
 */
const POOL = 1500;
const template = buildBaseline('V', H, channels, sampleBaseline(createRng(1), POOL), settings);
const fullWeights = windowWeights(template.grid, fullWindow(H));

function drawIndices(rng: ReturnType<typeof createRng>, n: number, pool = POOL): number[] {
  const idx = Array.from({ length: pool }, (_, i) => i);
  for (let i = 0; i <= n; i++) {
    const j = i + rng.int(pool - i);
    [idx[i], idx[j]] = [idx[j], idx[i]];
  }
  return idx.slice(0, n + 1);
}

function drawBaseline(rng: ReturnType<typeof createRng>, n: number): { baseline: Baseline; spare: RawTrack } {
  const idx = drawIndices(rng, n);
  const chosen = idx.slice(0, n);
  return {
    baseline: { ...template, sims: chosen.map((i) => template.sims[i]), curves: chosen.map((i) => template.curves[i]) },
    spare: template.sims[idx[n]],
  };
}

type Counts = Record<(typeof STATS)[number], number>;
function count(p: Record<(typeof STATS)[number], number>, into: Counts): void {
  for (const k of STATS) if (p[k] <= ALPHA) into[k]++;
}

function expectInBand(c: Record<string, number>, band: { lo: number; hi: number }): void {
  for (const [k, v] of Object.entries(c)) {
    expect(v, `${k}: ${v} rejections, band [${band.lo}, ${band.hi}]`).toBeGreaterThanOrEqual(band.lo);
    expect(v, `${k}: ${v} rejections, band [${band.lo}, ${band.hi}]`).toBeLessThanOrEqual(band.hi);
  }
}

describe(`size: null live runs, fresh baseline per repetition, ${SIZE_REPS} repetitions per check`, () => {
  it('the acceptance band [75, 125] holds a correct procedure with probability ≥ 99 % and fails a factor-2 one with probability ≥ 99 %', () => {
    const inside = (p: number) => binomialMass(SIZE_REPS, p, SIZE_BAND.lo, SIZE_BAND.hi);
    console.info(`P(inside [75, 125]): at 5 % ${inside(0.05).toFixed(5)}, at 2.5 % ${inside(0.025).toExponential(2)}, at 10 % ${inside(0.1).toExponential(2)}`);
    expect(inside(0.05)).toBeGreaterThanOrEqual(0.99);
    expect(inside(0.025)).toBeLessThanOrEqual(0.01);
    expect(inside(0.1)).toBeLessThanOrEqual(0.01);
  });

  it(`complete runs (N = 39): l2, score, residual and overall reject at α = 0.05 inside [75, 125]`, () => {
    const rng = createRng(1001);
    const n = 39;
    const c: Counts = { l2: 0, score: 0, residual: 0, overall: 0 };
    for (let i = 0; i < SIZE_REPS; i++) {
      const idx = drawIndices(rng, n);
      const sims = idx.slice(0, n).map((j) => template.curves[j]);
      const ref = buildReference(sims, fullWeights, 2, settings.components, 7 + i);
      count(judgeAgainst(ref, template.curves[idx[n]], 100_000 + i).pValues, c);
    }
    console.info(`size, complete runs (rejections of ${SIZE_REPS}):`, c);
    expectInBand(c, SIZE_BAND);
  });

  it('runs with a 12 s dropout or an early end (N = 39): inside [75, 125] (like-with-like windows)', () => {
    // Twelve window shapes; the pool is cut to each once (as curvesForWindow cuts the simulated
    // tracks for a run with that window) and every repetition draws its baseline and its live run
    // from the pool cut to its shape.
    const rng = createRng(1002);
    const n = 39;
    const pool = 600;
    const shapes = [20, 31, 42, 53, 64, 75].flatMap((s, k) => [
      { intervals: [[0, s] as [number, number], [s + 12, H] as [number, number]], gaps: [[s, s + 12] as [number, number]], end: H, k },
      { intervals: [[0, 40 + 9 * k] as [number, number]], gaps: [], end: 40 + 9 * k, k },
    ]);
    const cut = shapes.map((sh) => {
      const window = { intervals: sh.intervals, span: [0, sh.end] as [number, number], gaps: sh.gaps, partial: sh.end < H, full: false, nominalInterval: 0.5 };
      const base: Baseline = { ...template, sims: template.sims.slice(0, pool), curves: template.curves.slice(0, pool) };
      return { curves: curvesForWindow(base, window).curves, weights: windowWeights(template.grid, window) };
    });
    const c: Counts = { l2: 0, score: 0, residual: 0, overall: 0 };
    for (let i = 0; i < SIZE_REPS; i++) {
      const w = cut[i % cut.length];
      const idx = drawIndices(rng, n, w.curves.length);
      const ref = buildReference(idx.slice(0, n).map((j) => w.curves[j]), w.weights, 2, settings.components, 11 + i);
      count(judgeAgainst(ref, w.curves[idx[n]], 200_000 + i).pValues, c);
    }
    console.info(`size, dropouts and early ends (rejections of ${SIZE_REPS}):`, c);
    expectInBand(c, SIZE_BAND);
  });

  it('through assessRun on raw tracks (N = 99, 400 repetitions): inside the 99 % band of 400', () => {
    // The whole per-run path (window, smoothing, seeds from the run's name) on a smaller count.
    const reps = 400;
    const band = binomialInterval(reps, ALPHA, 0.99);
    const rng = createRng(1003);
    const c: Counts = { l2: 0, score: 0, residual: 0, overall: 0 };
    for (let i = 0; i < reps; i++) {
      const { baseline, spare } = drawBaseline(rng, N_SIMS);
      count(assessRun(baseline, { ...spare, track: `live-${i}` }).result.pValues, c);
    }
    console.info(`size through assessRun (rejections of ${reps}):`, c, 'band', band);
    expectInBand(c, band);
  });

  it('an early end judged on the whole horizon (extrapolated) would raise false alarms: why windows matter', () => {
    const rng = createRng(1004);
    const reps = 100;
    let rejections = 0;
    for (let i = 0; i < reps; i++) {
      const { baseline } = drawBaseline(rng, N_SIMS);
      const run = sampleTrack(rng, `short-${i}`, { endAt: 55 });
      const p = assessRun(baseline, run, { window: fullWindow(H), windowCurves: baseline.curves }).result.pValues;
      if (p.overall <= ALPHA) rejections++;
    }
    console.info(`whole-horizon judgement of runs ending at 55 s: ${rejections} of ${reps} rejected at 0.05`);
    expect(rejections).toBeGreaterThan(binomialInterval(reps, ALPHA, 0.99).hi);
  });
});

describe(`size of the event's evidence: ${SIZE_REPS} null events of 3 vignettes × 2 runs (N = 39 each)`, () => {
  it('each statistic combined by Fisher, and their calibrated minimum, reject at α = 0.05 inside [75, 125]', () => {
    const rng = createRng(1005);
    const n = 39;
    const c = { l2: 0, score: 0, residual: 0, event: 0, vignette: 0 };
    for (let e = 0; e < SIZE_REPS; e++) {
      const runs: RunPValues[] = [];
      let first: RunPValues[] = [];
      for (let v = 0; v < 3; v++) {
        const idx = drawIndices(rng, n + 1);
        const ref = buildReference(idx.slice(0, n).map((j) => template.curves[j]), fullWeights, 2, settings.components, 31 * e + v);
        const vr = [idx[n], idx[n + 1]].map((j, r) => {
          const res = judgeAgainst(ref, template.curves[j], seedFor(e, String(v), String(r)));
          return { pValues: res.pValues, nullPValues: res.nullPValues };
        });
        if (v === 0) first = vr;
        runs.push(...vr);
      }
      const ev = combineStatistics(runs, 'fisher', e, 'event', 999);
      const v0 = combineStatistics(first, 'fisher', e, 'V0', 999);
      for (const s of ['l2', 'score', 'residual'] as const) if (ev.byStatistic[s].pValue <= ALPHA) c[s]++;
      if (ev.pValue <= ALPHA) c.event++;
      if (v0.pValue <= ALPHA) c.vignette++;
    }
    console.info(`size of combined evidence (rejections of ${SIZE_REPS} events):`, c);
    expectInBand(c, SIZE_BAND);
  });
});

describe('in-sample calibration inflates false alarms; out-of-sample calibration does not', () => {
  // Many components relative to N make the difference plain: 20 components, N = 49.
  const rule = { kind: 'fixed', count: 20 } as const;
  const n = 49;
  const reps = 300;
  const b = binomialInterval(reps, ALPHA, 0.99);

  it('fit on the simulations, their statistics in sample, the live run projected: far too many rejections', () => {
    const rng = createRng(1004);
    let naive = 0;
    let naiveResidual = 0;
    for (let i = 0; i < reps; i++) {
      const { baseline, spare } = drawBaseline(rng, n);
      const grid = windowWeights(baseline.grid, fullWindow(H));
      const weights = joinedWeights(grid, channelScales(baseline.curves, grid, 2));
      const model = fitFpca(baseline.curves, weights, rule);
      const ref = inSampleStatistics(model, baseline.curves);
      const live = projectCurve(model, smoothTrack(spare, baseline.basis, baseline.gridEval, baseline.penalty).curve);
      if (rankPValue(ref.score, Math.sqrt(live.mahalanobisSq)) <= ALPHA) naive++;
      if (rankPValue(ref.residual, Math.sqrt(live.residualSq)) <= ALPHA) naiveResidual++;
    }
    console.info(`in-sample calibration: score ${naive}, residual ${naiveResidual} of ${reps} null runs rejected at 0.05 (band ${b.lo}–${b.hi})`);
    expect(naive).toBeGreaterThan(b.hi);
    expect(naiveResidual).toBeGreaterThan(b.hi);
  });

  it(`the same statistics calibrated out of sample (leave-one-out) stay inside [75, 125] over ${SIZE_REPS} repetitions`, () => {
    const rng = createRng(1006);
    const c = { score: 0, residual: 0 };
    for (let i = 0; i < SIZE_REPS; i++) {
      const idx = drawIndices(rng, n);
      const ref = buildReference(idx.slice(0, n).map((j) => template.curves[j]), fullWeights, 2, rule, 5 + i);
      const p = judgeAgainst(ref, template.curves[idx[n]], 300_000 + i).pValues;
      if (p.score <= ALPHA) c.score++;
      if (p.residual <= ALPHA) c.residual++;
    }
    console.info(`leave-one-out calibration, 20 components, N = ${n}: rejections of ${SIZE_REPS}`, c);
    expectInBand(c, SIZE_BAND);
  });
});

const baseline = drawBaseline(createRng(77), N_SIMS).baseline;

describe('power against built discrepancies (100 live runs each)', () => {
  const reps = 100;
  const cases: Array<{ name: string; d: Discrepancy; stat: 'l2' | 'score' | 'residual' | 'overall'; atLeast: number }> = [
    // sizes relative to the channel-0 spread: mode sd 12 m at mid-track, noise 1 m
    { name: 'level shift of 10 m', d: { kind: 'shift', size: 10 }, stat: 'overall', atLeast: 0.8 },
    { name: 'local bump of 20 m at t = 70 s (width 6 s)', d: { kind: 'bump', size: 20, centre: 70, width: 6 }, stat: 'overall', atLeast: 0.8 },
    { name: 'small 6-cycle wiggle of 4 m', d: { kind: 'wiggle', size: 4, cycles: 6 }, stat: 'residual', atLeast: 0.8 },
  ];
  for (const c of cases) {
    it(`${c.name}: detected by ${c.stat} in at least ${c.atLeast * 100} % of runs`, () => {
      const rng = createRng(2000 + c.name.length);
      const hits = { l2: 0, score: 0, residual: 0, overall: 0 };
      for (let i = 0; i < reps; i++) {
        const p = assessRun(baseline, sampleTrack(rng, `alt-${i}`, { discrepancy: c.d })).result.pValues;
        for (const k of ['l2', 'score', 'residual', 'overall'] as const) if (p[k] <= ALPHA) hits[k]++;
      }
      console.info(`power, ${c.name} (of ${reps}):`, hits);
      expect(hits[c.stat] / reps).toBeGreaterThanOrEqual(c.atLeast);
    });
  }

  it('the residual and score statistics catch a wiggle that the L2 distance misses', () => {
    const rng = createRng(3001);
    const hits = { l2: 0, score: 0, residual: 0 };
    for (let i = 0; i < reps; i++) {
      const p = assessRun(baseline, sampleTrack(rng, `w-${i}`, { discrepancy: { kind: 'wiggle', size: 4, cycles: 6 } })).result.pValues;
      for (const k of ['l2', 'score', 'residual'] as const) if (p[k] <= ALPHA) hits[k]++;
    }
    expect(hits.residual).toBeGreaterThan(hits.l2 + 40);
  });
});

describe('windowed baselines', () => {
  it('re-smooths only the simulated tracks that cover the window and cuts them to it', () => {
    const run = sampleTrack(createRng(5), 'early', { endAt: 50 });
    const a = assessRun(baseline, run);
    expect(a.flags).toContain('partial');
    expect(a.window.span[1]).toBeLessThanOrEqual(50);
    expect(a.simsUsed).toBe(N_SIMS);
    const active = a.active.reduce((s, v) => s + v, 0);
    expect(active).toBeLessThan(settings.gridSize / 2 + 2);
    const { curves } = curvesForWindow(baseline, a.window);
    expect(curves.length).toBe(N_SIMS);
  });
});
