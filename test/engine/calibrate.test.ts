/**
 * Validity and power of the per-run p-values. All data are synthetic (test/support/synthetic.ts);
 * the acceptance bands are exact binomial intervals around the nominal level (common practice for
 * Monte Carlo size checks).
 */
import { describe, expect, it } from 'vitest';
import { assessRun, buildBaseline, curvesForWindow, smoothTrack, type Baseline } from '../../engine/assess.js';
import { channelScales, inSampleStatistics, joinedWeights, rankPValue } from '../../engine/calibrate.js';
import { fitFpca, projectCurve } from '../../engine/fpca.js';
import { fullWindow, windowWeights } from '../../engine/grid.js';
import { createRng } from '../../engine/rng.js';
import type { RawTrack } from '../../engine/types.js';
import { binomialInterval } from '../support/compare.js';
import { SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, H, sampleBaseline, sampleTrack, type Discrepancy, type SampleOptions } from '../support/synthetic.js';

const channels = SYNTHETIC_CHANNELS;
const settings = SYNTHETIC_SETTINGS;
const N_SIMS = 99;
const REPS = 400;
const ALPHA = 0.05;
const band = binomialInterval(REPS, ALPHA, 0.99);
const STATS = ['l2', 'score', 'residual', 'overall'] as const;

/**
 * Validity is a statement about the joint draw of the baseline and the live run: conditional on
 * one fixed baseline the rejection rate of any rank test varies (about Beta(5, 95) for N = 99).
 * So each repetition draws a fresh baseline: N + 1 distinct tracks from a pool of simulated
 * tracks (smoothed once), the first N as the baseline and the last as the live run.
 */
const POOL = 1500;
const template = buildBaseline('V', H, channels, sampleBaseline(createRng(1), POOL), settings);

function drawBaseline(rng: ReturnType<typeof createRng>, n: number): { baseline: Baseline; spare: RawTrack } {
  const idx = Array.from({ length: POOL }, (_, i) => i);
  for (let i = 0; i <= n; i++) {
    const j = i + rng.int(POOL - i);
    [idx[i], idx[j]] = [idx[j], idx[i]];
  }
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

describe(`size: null live runs, fresh baseline of N = ${N_SIMS} per repetition`, () => {
  it(`complete runs: each statistic rejects at α = 0.05 inside the binomial 99 % band [${band.lo}, ${band.hi}] of ${REPS}`, () => {
    const rng = createRng(1001);
    const c: Counts = { l2: 0, score: 0, residual: 0, overall: 0 };
    for (let i = 0; i < REPS; i++) {
      const { baseline, spare } = drawBaseline(rng, N_SIMS);
      count(assessRun(baseline, spare).result.pValues, c);
    }
    console.info(`size, complete runs (rejections of ${REPS}):`, c);
    for (const k of STATS) {
      expect(c[k], k).toBeGreaterThanOrEqual(band.lo);
      expect(c[k], k).toBeLessThanOrEqual(band.hi);
    }
  });

  it('runs with a 12 s dropout or an early end: rejection rate inside the band (like-with-like windows)', () => {
    const rng = createRng(1002);
    const reps = 300;
    const n = 59;
    const c: Counts = { l2: 0, score: 0, residual: 0, overall: 0 };
    for (let i = 0; i < reps; i++) {
      const { baseline } = drawBaseline(rng, n);
      const shape: SampleOptions = i % 2 === 0 ? { dropout: [20 + (i % 50), 32 + (i % 50)] } : { endAt: 40 + (i % 55) };
      const run = sampleTrack(rng, `live-${i}`, shape);
      const a = assessRun(baseline, run);
      expect(a.flags.length, `run ${i} flagged`).toBeGreaterThan(0);
      count(a.result.pValues, c);
    }
    const b = binomialInterval(reps, ALPHA, 0.99);
    console.info(`size, dropouts and early ends (rejections of ${reps}):`, c, 'band', b);
    for (const k of STATS) {
      expect(c[k], k).toBeGreaterThanOrEqual(b.lo);
      expect(c[k], k).toBeLessThanOrEqual(b.hi);
    }
  });

  it('an early end judged on the whole horizon (extrapolated) would raise false alarms: why windows matter', () => {
    const rng = createRng(1003);
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

describe('in-sample calibration inflates false alarms; full conformal does not', () => {
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

  it('the same statistic calibrated by full conformal stays inside the band', () => {
    const rng = createRng(1004);
    let conformal = 0;
    let conformalResidual = 0;
    for (let i = 0; i < reps; i++) {
      const { baseline, spare } = drawBaseline(rng, n);
      const p = assessRun({ ...baseline, settings: { ...settings, components: rule } }, spare).result.pValues;
      if (p.score <= ALPHA) conformal++;
      if (p.residual <= ALPHA) conformalResidual++;
    }
    console.info(`full conformal: score ${conformal}, residual ${conformalResidual} of ${reps} null runs rejected at 0.05`);
    for (const c of [conformal, conformalResidual]) {
      expect(c).toBeGreaterThanOrEqual(b.lo);
      expect(c).toBeLessThanOrEqual(b.hi);
    }
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
