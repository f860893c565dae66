/**
 * The demo's built-in timing discrepancy (ingest/demo/scenario.ts header, DEVELOPERS.md): in the
 * high sea state the model predicts a speed loss of 0.20 in the dogleg and the truth is 0.50, so the
 * live S3 runs leave the turn about 40 s late and stay behind. The diagnosis (engine/diagnosis.ts,
 * engine/registration.ts) must call them `timing` and measure the lag.
 *
 * The lag the truth implies is computed from the generator itself (ingest/demo/motion.ts), not from
 * the diagnosis:
 *   - built-in: the model track and the truth track of a replicate with every random draw at its
 *     mean (start on the waypoint, cruise 8.5 m/s, lead 8 s, no disturbance), the lag at t = 360 s
 *     being 360 − s where the model track's range at s equals the truth track's at 360 (range falls
 *     monotonically on the final leg, which runs straight in towards the radar);
 *   - each run's own lag: its own motion path, regenerated from its documented stream (motion is the
 *     first fork of createRng(streamSeed(seed, vignette, 'live', k))), against the same model track.
 * Tolerances: the estimate against the run's own lag, one P-spline segment (horizon/segments = 9 s:
 * the smoothed curves cannot place a feature more finely); against the built-in lag, the natural
 * timing scatter of a live run (2.576 sd of the runs' own lags, a 99 % normal band). The interval
 * must cover the run's own lag at the binomial rate of a 95 % interval. Its coverage of the
 * built-in lag is printed, not asserted: the interval takes the natural timing scatter from the
 * simulated runs, and the live S3 runs, slower through the turn, scatter more (measured below).
 */
import { describe, expect, it } from 'vitest';
import { buildBaseline } from '../../../engine/assess.js';
import { judgeRun, meanCurve } from '../../../engine/event.js';
import { createRng, type Rng } from '../../../engine/rng.js';
import { diagnosisRow } from '../../../ingest/report.js';
import { parsePlan } from '../../../ingest/plan.js';
import { simulateApproach, type VesselPath } from '../../../ingest/demo/motion.js';
import {
  approachConditions,
  DEFAULT_SEED,
  generateLiveRun,
  generateScenario,
  HORIZON,
  RADAR_ANTENNA_HEIGHT,
  RANGE_NOISE_SD,
  streamSeed,
} from '../../../ingest/demo/scenario.js';
import { binomialInterval } from '../../support/compare.js';

const S3 = ['S3-L1', 'S3-L2', 'S3-L3'] as const;
const RUNS = 10;

/** A replicate with every draw at its mean and no disturbance. */
const still: Rng = { uniform: () => 0.5, normal: () => 0, int: () => 0, fork: () => still };

const rangeAt = (p: { east: Float64Array; north: Float64Array }, k: number): number => Math.hypot(p.east[k], p.north[k], RADAR_ANTENNA_HEIGHT);

/** 360 − s where the model's range at s equals `end` (the truth's range at 360), by linear interpolation. */
function lagAtEnd(model: { east: Float64Array; north: Float64Array }, dt: number, end: number): number {
  const n = model.east.length - 1;
  let k = n;
  while (k > 0 && rangeAt(model, k) < end) k--;
  const r0 = rangeAt(model, k);
  const r1 = rangeAt(model, k + 1);
  return HORIZON - (k + (end - r0) / (r1 - r0)) * dt;
}

describe('the demo high-sea-state runs are late, and the diagnosis says so', () => {
  const noiseless = new Map<string, { lag: number; model: VesselPath; turnLate: number }>();
  const builtIn = new Map<string, number>();
  for (const v of S3) {
    const model = simulateApproach(approachConditions(v, 'sim'), HORIZON, still);
    const truth = simulateApproach(approachConditions(v, 'live'), HORIZON, still);
    const lag = lagAtEnd(model, model.dt, rangeAt(truth, truth.east.length - 1));
    noiseless.set(v, { lag, model, turnLate: truth.turnEnd - model.turnEnd });
    builtIn.set(v, lag);
  }

  it('the generator: the S3 truth leaves the turn about 40 s after the model (scenario header) and ends a few seconds more behind it', () => {
    for (const v of S3) {
      const n = noiseless.get(v)!;
      const model = n.model;
      // Range falls monotonically on the final leg once the heading has settled (20 s after the
      // wheel-over; straight in towards the radar), so the range-matched lag is well defined there.
      const start = Math.ceil((model.turnEnd + 20) / model.dt);
      for (let k = start + 1; k < model.east.length; k++) expect(rangeAt(model, k)).toBeLessThan(rangeAt(model, k - 1));
      expect(HORIZON - n.lag).toBeGreaterThan(model.turnEnd + 20);
      console.info(`${v}: the truth leaves the turn ${n.turnLate.toFixed(1)} s after the model; built-in lag at 360 s ${n.lag.toFixed(1)} s`);
      expect(Math.abs(n.turnLate - 40)).toBeLessThanOrEqual(2.5);
      // The final-leg speeds are equal (3 m/s), so the lag at the end stays near the lag at the turn's
      // end; the slower truth also loses less distance while slowing down to it (speed lag 8 s).
      expect(n.lag).toBeGreaterThan(n.turnLate);
      expect(n.lag).toBeLessThan(n.turnLate + 8);
    }
  });

  it(`every S3 live run (${RUNS} per vignette, seed ${DEFAULT_SEED}, 200 simulated runs) is diagnosed timing by a warp, its lag close to the run's own and to the built-in one`, () => {
    const scenario = generateScenario({ seed: DEFAULT_SEED, simsPerVignette: 200, liveRunsPerVignette: 1 });
    const plan = parsePlan(JSON.stringify(scenario.planJson), 'demo.json');
    const segment = HORIZON / plan.analysis.segments;
    const rows: Array<{ v: string; k: number; kind: string; model?: string; lag: number; interval: readonly [number, number]; own: number; buildUp?: readonly [number, number]; turn: [number, number] }> = [];
    for (const v of S3) {
      const baseline = buildBaseline(v, HORIZON, plan.channels, scenario.baseline.filter((t) => t.vignette === v), plan.analysis);
      const simMean = meanCurve(baseline.curves);
      const model = noiseless.get(v)!.model;
      for (let k = 1; k <= RUNS; k++) {
        const run = k === 1 ? scenario.live.find((t) => t.vignette === v && t.track === 'live-1')! : generateLiveRun(v, k, DEFAULT_SEED);
        // The run's own motion path, checked against its radar samples (range residual sd ≈ the
        // radar's 8 m: the path is the one the samples came from).
        const path = simulateApproach(approachConditions(v, 'live'), HORIZON, createRng(streamSeed(DEFAULT_SEED, v, 'live', k)).fork());
        let ss = 0;
        for (let i = 0; i < run.t.length; i++) {
          const x = run.t[i] / path.dt;
          const j = Math.min(Math.floor(x), path.east.length - 2);
          const w = x - j;
          const r = (1 - w) * rangeAt(path, j) + w * rangeAt(path, j + 1);
          ss += (run.values[0][i] - r) ** 2;
        }
        const ratio = Math.sqrt(ss / run.t.length) / RANGE_NOISE_SD;
        expect(ratio).toBeGreaterThan(0.8);
        expect(ratio).toBeLessThan(1.2);
        const own = lagAtEnd(model, model.dt, rangeAt(path, path.east.length - 1));
        const outcome = judgeRun(baseline, run, simMean);
        const d = outcome.diagnosis;
        rows.push({
          v,
          k,
          kind: d?.kind ?? 'not diagnosed',
          model: d?.timing?.model,
          lag: d?.timing?.lag ?? Number.NaN,
          interval: d?.timing?.interval ?? [Number.NaN, Number.NaN],
          own,
          buildUp: d?.timing?.buildUp,
          turn: [path.turnStart, path.turnEnd],
        });
        if (d) {
          const row = diagnosisRow(d);
          expect(row.timeShift).toBe(d.timing?.lag);
          expect(row.timing).toBe(d.timing?.model);
        }
      }
    }
    for (const r of rows) {
      console.info(
        `${r.v} live-${r.k}: ${r.kind}${r.model ? ` (${r.model})` : ''}, lag ${r.lag.toFixed(1)} s [${r.interval.map((x) => x.toFixed(1)).join(', ')}], own ${r.own.toFixed(1)} s, built-in ${builtIn.get(r.v)!.toFixed(1)} s; builds up ${r.buildUp?.map((x) => x.toFixed(0)).join('..')} s, turn ${r.turn.map((x) => x.toFixed(0)).join('..')} s`,
      );
    }
    const n = rows.length;
    const owns = rows.map((r) => r.own);
    const ownMean = owns.reduce((a, b) => a + b, 0) / n;
    const ownSd = Math.sqrt(owns.reduce((a, b) => a + (b - ownMean) ** 2, 0) / (n - 1));
    const meanLag = rows.reduce((a, r) => a + r.lag, 0) / n;
    const meanBuiltIn = rows.reduce((a, r) => a + builtIn.get(r.v)!, 0) / n;
    const coversOwn = rows.filter((r) => r.interval[0] <= r.own && r.own <= r.interval[1]).length;
    const coversBuiltIn = rows.filter((r) => r.interval[0] <= builtIn.get(r.v)! && builtIn.get(r.v)! <= r.interval[1]).length;
    const errors = rows.map((r) => Math.abs(r.lag - r.own));
    console.info(
      `S3 live runs: timing ${rows.filter((r) => r.kind === 'timing').length} of ${n}; |lag − own|: max ${Math.max(...errors).toFixed(1)} s;`,
      `own lags ${ownMean.toFixed(1)} ± ${ownSd.toFixed(1)} s (sd); mean estimated lag ${meanLag.toFixed(1)} s against built-in ${meanBuiltIn.toFixed(1)} s;`,
      `interval covers the own lag in ${coversOwn}, the built-in lag in ${coversBuiltIn} of ${n}`,
    );
    for (const r of rows) {
      const label = `${r.v} live-${r.k}`;
      expect(r.kind, label).toBe('timing');
      expect(r.model, label).toBe('warp');
      expect(Math.abs(r.lag - r.own), label).toBeLessThanOrEqual(segment);
      expect(Math.abs(r.lag - builtIn.get(r.v)!), label).toBeLessThanOrEqual(2.576 * ownSd);
      // The lag builds up in the turn: it has started before the run leaves the turn, and 90 % of
      // it is there within one knot interval of the warp (360/6 = 60 s) after that.
      expect(r.buildUp![0], label).toBeLessThanOrEqual(r.turn[1]);
      expect(r.buildUp![1], label).toBeGreaterThanOrEqual(r.turn[0]);
      expect(r.buildUp![1], label).toBeLessThanOrEqual(r.turn[1] + HORIZON / 6);
    }
    expect(coversOwn).toBeGreaterThanOrEqual(binomialInterval(n, 0.95, 0.99).lo);
  }, 300_000);
});
