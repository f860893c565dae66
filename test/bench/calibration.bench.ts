/**
 * Calibration benchmark: `npm run bench:calibration`. Prints figures; asserts nothing about time.
 *
 * 1. Per-statistic rejection rates at α = 0.05 of the earlier calibration (one pooled fit of the
 *    N + 1 curves, plain ranks) and the current one (every curve judged out of sample, smoothed
 *    ranks), side by side, on the synthetic tracks of test/support/synthetic.ts (invented data):
 *    null runs (a fresh baseline of N = 99 for each of 400 runs) and five discrepancies judged
 *    against one baseline of N = 199: a level shift of 10 m, a local bump of 20 m, a 6-cycle
 *    wiggle of 4 m, and a manoeuvre 4 s late (the turn late, as in the demo's high sea state).
 *    (Spread and a change of shape in the leading components are in test/engine/power.test.ts,
 *    against numpy.)
 * 2. Times at N = 500 simulated runs, grid 128 × 2 channels (the demo's settings): the reference of
 *    one window (once per window, shared by every run), the judgement of one closed run against a
 *    cached reference, and a provisional update of a run in flight (smoothing its prefix and judging
 *    it), also per point at 2 Hz with a provisional judgement every 10 s of track time.
 */
import { assessRun, buildBaseline, curvesForWindow, smoothTrack, type Baseline } from '../../engine/assess.js';
import { buildReference, judgeAgainst, pooledConformalAssess } from '../../engine/calibrate.js';
import { fullWindow, windowWeights } from '../../engine/grid.js';
import { createRng } from '../../engine/rng.js';
import { DEFAULT_ANALYSIS, type RawTrack } from '../../engine/types.js';
import { H, SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, sampleBaseline, sampleManoeuvreBaseline, sampleManoeuvreTrack, sampleTrack, type Discrepancy } from '../support/synthetic.js';

const ALPHA = 0.05;
const STATS = ['l2', 'score', 'residual', 'overall'] as const;
type Counts = Record<(typeof STATS)[number], number>;

function zero(): Counts {
  return { l2: 0, score: 0, residual: 0, overall: 0 };
}

function judgeBoth(baseline: Baseline, run: RawTrack, old: Counts, now: Counts): void {
  const a = assessRun(baseline, run);
  for (const k of STATS) if (a.result.pValues[k] <= ALPHA) now[k]++;
  const gw = windowWeights(baseline.grid, a.window);
  const p = pooledConformalAssess(baseline.curves, a.curve, gw, baseline.channels.length, baseline.settings.components).pValues;
  for (const k of STATS) if (p[k] <= ALPHA) old[k]++;
}

function row(name: string, n: number, old: Counts, now: Counts): string {
  const pct = (c: number) => `${((100 * c) / n).toFixed(1)} %`;
  return `| ${name} | ${n} | ${STATS.map((k) => `${pct(old[k])} → ${pct(now[k])}`).join(' | ')} |`;
}

function part1(): void {
  const settings = SYNTHETIC_SETTINGS;
  const rows: string[] = [];
  // Null: a fresh baseline per run.
  {
    const rng = createRng(41);
    const pool = buildBaseline('V', H, SYNTHETIC_CHANNELS, sampleBaseline(rng.fork(), 800), settings);
    const old = zero();
    const now = zero();
    const reps = 400;
    const n = 99;
    for (let i = 0; i < reps; i++) {
      const idx = Array.from({ length: 800 }, (_, j) => j);
      for (let j = 0; j <= n; j++) {
        const k = j + rng.int(800 - j);
        [idx[j], idx[k]] = [idx[k], idx[j]];
      }
      const b: Baseline = { ...pool, sims: idx.slice(0, n).map((j) => pool.sims[j]), curves: idx.slice(0, n).map((j) => pool.curves[j]) };
      judgeBoth(b, { ...pool.sims[idx[n]], track: `null-${i}` }, old, now);
    }
    rows.push(row('no discrepancy (false alarms)', reps, old, now));
  }
  const rng = createRng(42);
  const baseline = buildBaseline('V', H, SYNTHETIC_CHANNELS, sampleBaseline(rng.fork(), 199), settings);
  const reps = 100;
  const cases: Array<{ name: string; d: Discrepancy }> = [
    { name: 'level: shift of 10 m', d: { kind: 'shift', size: 10 } },
    { name: 'shape: local bump of 20 m', d: { kind: 'bump', size: 20, centre: 70, width: 6 } },
    { name: 'fine: 6-cycle wiggle of 4 m', d: { kind: 'wiggle', size: 4, cycles: 6 } },
  ];
  for (const c of cases) {
    const old = zero();
    const now = zero();
    const live = rng.fork();
    for (let i = 0; i < reps; i++) judgeBoth(baseline, sampleTrack(live, `${c.name}-${i}`, { discrepancy: c.d }), old, now);
    rows.push(row(c.name, reps, old, now));
  }
  {
    const mrng = createRng(43);
    const mb = buildBaseline('V', H, SYNTHETIC_CHANNELS, sampleManoeuvreBaseline(mrng.fork(), 199), settings);
    const old = zero();
    const now = zero();
    const live = mrng.fork();
    for (let i = 0; i < reps; i++) judgeBoth(mb, sampleManoeuvreTrack(live, `late-${i}`, { discrepancy: { kind: 'timeShift', seconds: 4 } }), old, now);
    rows.push(row('timing: manoeuvre 4 s late', reps, old, now));
  }
  console.log('\nper-statistic rejection rate at α = 0.05, earlier pooled calibration → current leave-one-out calibration');
  console.log(`| case | runs | ${STATS.join(' | ')} |`);
  console.log(`| --- | --- | ${STATS.map(() => '---').join(' | ')} |`);
  for (const r of rows) console.log(r);
}

function part2(): void {
  const settings = { ...DEFAULT_ANALYSIS, gridSize: 128, segments: 40 };
  const N = 500;
  const rng = createRng(44);
  const baseline = buildBaseline('V', H, SYNTHETIC_CHANNELS, sampleBaseline(rng.fork(), N, 0.5), settings);
  const gw = windowWeights(baseline.grid, fullWindow(H));
  buildReference(baseline.curves, gw, 2, settings.components);
  let t0 = performance.now();
  const refReps = 3;
  let ref = buildReference(baseline.curves, gw, 2, settings.components);
  for (let i = 1; i < refReps; i++) ref = buildReference(baseline.curves, gw, 2, settings.components, i);
  const refMs = (performance.now() - t0) / refReps;
  const live = sampleTrack(rng, 'live');
  const curve = smoothTrack(live, baseline.basis, baseline.gridEval, baseline.penalty).curve;
  const judgeReps = 20000;
  t0 = performance.now();
  let sink = 0;
  for (let i = 0; i < judgeReps; i++) sink += judgeAgainst(ref, curve, i).pValues.overall;
  const judgeUs = (1000 * (performance.now() - t0)) / judgeReps;
  // A provisional update: the prefix up to 60 s smoothed and judged against its window's cached
  // reference (the service keeps one per window, shared by every run in flight).
  const upTo = 60;
  let n = 0;
  while (n < live.t.length && live.t[n] <= upTo) n++;
  const prefix: RawTrack = { ...live, t: live.t.subarray(0, n), values: live.values.map((v) => v.subarray(0, n)) };
  const window = { intervals: [[0, upTo]] as Array<[number, number]>, span: [0, live.t[n - 1]] as [number, number], gaps: [], partial: true, full: false, nominalInterval: 0.5 };
  t0 = performance.now();
  const windowCurves = curvesForWindow(baseline, window).curves;
  const windowRef = buildReference(windowCurves, windowWeights(baseline.grid, window), 2, settings.components);
  const windowMs = performance.now() - t0;
  const updReps = 200;
  t0 = performance.now();
  for (let i = 0; i < updReps; i++) {
    const c = smoothTrack(prefix, baseline.basis, baseline.gridEval, baseline.penalty).curve;
    sink += judgeAgainst(windowRef, c, i).pValues.overall;
  }
  const updMs = (performance.now() - t0) / updReps;
  console.log(`\ntimes at N = ${N} simulated runs, grid ${settings.gridSize} × 2 channels, ${settings.segments} spline segments`);
  console.log(`| step | time |`);
  console.log(`| --- | --- |`);
  console.log(`| reference of one window (model + every leave-one-out statistic; once per window) | ${refMs.toFixed(1)} ms |`);
  console.log(`| a new provisional window (cut and re-smooth the ${windowCurves.length} simulated runs, then its reference; once per 10 s step) | ${windowMs.toFixed(0)} ms |`);
  console.log(`| judging one closed run (smoothed curve) against a cached reference | ${judgeUs.toFixed(1)} µs |`);
  console.log(`| provisional update of a run in flight (smooth ${n} samples of its prefix + judge) | ${updMs.toFixed(2)} ms |`);
  console.log(`| the same per point, at 2 Hz with a provisional judgement every 10 s of track time | ${(updMs / 20).toFixed(3)} ms |`);
  console.log(`(checksum ${sink.toFixed(3)})`);
}

// BENCH_PART=rates or BENCH_PART=times runs one part only.
const only = process.env.BENCH_PART;
if (only !== 'times') part1();
if (only !== 'rates') part2();
