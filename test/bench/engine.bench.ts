/**
 * Engine benchmark: `npm run bench`. Prints figures; asserts nothing about time.
 *
 * Workload (synthetic, seeded): 20 vignettes × 500 simulated tracks × 2 channels × about 400
 * irregular samples over 360 s; grid 256 points; P-spline with 40 segments; components by 95 %
 * of variance. Measured:
 *   - smoothing every simulated track (P-spline, GCV per channel);
 *   - baseline fit per vignette (mean, weighted FPCA), and the same fit by numpy (LAPACK eigh)
 *     on the same curves in the same run, as a ratio; the leading eigenvalues must agree first;
 *   - the calibration reference of one window (the model of the N simulated curves and every
 *     simulated curve's leave-one-out statistics), the judgement of one closed run against a cached
 *     reference, and the earlier pooled fit of N + 1 curves per run for comparison;
 *   - scoring one smoothed track against a fitted model (projection), and smoothing + scoring.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { applyBasis, evaluateBasis, splineBasis } from '../../engine/bspline.js';
import { buildReference, channelScales, joinedWeights, judgeAgainst, pooledConformalAssess } from '../../engine/calibrate.js';
import { fitFpca, projectCurve } from '../../engine/fpca.js';
import { fullWindow, uniformGrid, windowWeights } from '../../engine/grid.js';
import { differencePenaltyBand, smoothGcv } from '../../engine/pspline.js';
import { createRng, type Rng } from '../../engine/rng.js';

const V = Number(process.env.BENCH_VIGNETTES ?? 20);
const N = Number(process.env.BENCH_SIMS ?? 500);
const SAMPLES = 400;
const H = 360;
const GRID = 256;
const SEGMENTS = 40;
const FRACTION = 0.95;

function track(rng: Rng): { t: Float64Array; y: Float64Array[] } {
  const a = Array.from({ length: 8 }, () => rng.normal());
  const t = new Float64Array(SAMPLES);
  let s = 0;
  for (let i = 0; i < SAMPLES; i++) {
    s += (H / SAMPLES) * (0.8 + 0.4 * rng.uniform());
    t[i] = Math.min(s - 0.5, H);
  }
  const y0 = Float64Array.from(t, (x) => 3000 - 7 * x + 60 * a[0] * Math.sin((Math.PI * x) / H) + 25 * a[1] * Math.sin((2 * Math.PI * x) / H) + 10 * a[2] * Math.cos((3 * Math.PI * x) / H) + 8 * rng.normal());
  const y1 = Float64Array.from(t, (x) => 130 + 0.05 * x + 2 * a[3] * Math.sin((Math.PI * x) / H) + 0.8 * a[4] * Math.cos((2 * Math.PI * x) / H) + 0.3 * a[5] * Math.sin((5 * Math.PI * x) / H) + 0.4 * rng.normal());
  return { t, y: [y0, y1] };
}

function ms(x: number): string {
  return `${x.toFixed(2)} ms`;
}

function main(): void {
  const rng = createRng(2026);
  const basis = splineBasis(H, SEGMENTS);
  const grid = uniformGrid(H, GRID);
  const ev = evaluateBasis(basis, grid.points);
  const P = differencePenaltyBand(basis.size);
  const gw = windowWeights(grid, fullWindow(H));
  console.log(`workload: ${V} vignettes × ${N} simulated tracks × 2 channels × ${SAMPLES} samples, grid ${GRID}, ${SEGMENTS} segments`);

  // 1. smoothing
  const raw = Array.from({ length: V }, () => Array.from({ length: N }, () => track(rng)));
  let t0 = performance.now();
  const curves = raw.map((vs) =>
    vs.map(({ t, y }) => {
      const c = new Float64Array(2 * GRID);
      for (let ch = 0; ch < 2; ch++) applyBasis(ev, smoothGcv(basis, t, y[ch], P).coefficients, c, ch * GRID);
      return c;
    }),
  );
  const smoothMs = performance.now() - t0;
  console.log(`smoothing: ${ms(smoothMs)} for ${V * N * 2} track-channels (${((1000 * smoothMs) / (V * N * 2)).toFixed(1)} µs each)`);

  // 2. baseline fit, ours
  const weights = curves.map((vs) => joinedWeights(gw, channelScales(vs, gw, 2)));
  fitFpca(curves[0], weights[0], { kind: 'variance', fraction: FRACTION }); // warm-up
  const fitMs: number[] = [];
  const models = curves.map((vs, i) => {
    const s = performance.now();
    const m = fitFpca(vs, weights[i], { kind: 'variance', fraction: FRACTION });
    fitMs.push(performance.now() - s);
    return m;
  });

  // 3. numpy on the same curves (each vignette with its own weights: write weighted copies)
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  let numpy: { numpy: string; seconds: number[]; eigenvalues: number[][] } | undefined;
  try {
    // Fold the per-vignette channel scales into the curves so one weight vector serves all.
    const D = 2 * GRID;
    const flat = new Float64Array(V * N * D);
    curves.forEach((vs, i) => vs.forEach((c, j) => {
      for (let d = 0; d < D; d++) flat[(i * N + j) * D + d] = c[d] * Math.sqrt(weights[i][d] / gw[d % GRID]);
    }));
    const wAll = Float64Array.from({ length: D }, (_, d) => gw[d % GRID]);
    writeFileSync(join(dir, 'curves.f64'), Buffer.from(flat.buffer));
    writeFileSync(join(dir, 'weights.f64'), Buffer.from(wAll.buffer));
    const script = join(process.cwd(), 'test', 'bench', 'fit_reference.py');
    const run = spawnSync('python3', [script, join(dir, 'curves.f64'), join(dir, 'weights.f64'), String(V), String(N), String(D), String(FRACTION)], { encoding: 'utf8' });
    if (run.status !== 0) console.log(`numpy reference unavailable: ${run.stderr.trim() || run.error?.message}`);
    else numpy = JSON.parse(run.stdout);
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  const ourTotal = fitMs.reduce((a, b) => a + b, 0);
  console.log(`baseline fit (ours, ${models[0].solver}): ${ms(ourTotal / V)} per vignette (${ms(ourTotal)} total); components kept: ${models.map((m) => m.eigenvalues.length).join(',')}`);
  if (numpy) {
    let worst = 0;
    numpy.eigenvalues.forEach((ev5, i) => ev5.forEach((v, k) => {
      if (k < models[i].eigenvalues.length) worst = Math.max(worst, Math.abs(models[i].eigenvalues[k] - v) / v);
    }));
    if (worst > 1e-6) {
      console.log(`baseline fit: eigenvalues differ from numpy by ${worst.toExponential(2)} (relative): no ratio reported`);
    } else {
      const npTotal = 1000 * numpy.seconds.reduce((a, b) => a + b, 0);
      console.log(`baseline fit (numpy ${numpy.numpy}, eigh): ${ms(npTotal / V)} per vignette; ours / numpy = ${(ourTotal / npTotal).toFixed(2)} (eigenvalues agree to ${worst.toExponential(1)})`);
    }
  }

  // 4. calibration: the window's reference (once per window, shared by every run judged on it)
  // and the judgement of one closed run against it; the earlier pooled fit of N + 1 curves beside.
  const liveRaw = track(rng);
  const liveCurve = new Float64Array(2 * GRID);
  for (let ch = 0; ch < 2; ch++) applyBasis(ev, smoothGcv(basis, liveRaw.t, liveRaw.y[ch], P).coefficients, liveCurve, ch * GRID);
  const rule = { kind: 'variance', fraction: FRACTION } as const;
  buildReference(curves[0], gw, 2, rule);
  const refReps = Math.min(V, 4);
  t0 = performance.now();
  const refs = Array.from({ length: refReps }, (_, i) => buildReference(curves[i], gw, 2, rule));
  console.log(`calibration reference of one window (model of ${N} simulated curves + every leave-one-out statistic): ${ms((performance.now() - t0) / refReps)}`);
  const judgeReps = 20000;
  t0 = performance.now();
  let check = 0;
  for (let i = 0; i < judgeReps; i++) check += judgeAgainst(refs[i % refReps], liveCurve, i).pValues.overall;
  console.log(`judging one closed run (smoothed) against a cached reference of ${N}: ${((1000 * (performance.now() - t0)) / judgeReps).toFixed(1)} µs (checksum ${check.toFixed(3)})`);
  pooledConformalAssess(curves[0], liveCurve, gw, 2, rule);
  t0 = performance.now();
  const reps = 5;
  for (let i = 0; i < reps; i++) pooledConformalAssess(curves[i % V], liveCurve, gw, 2, rule);
  console.log(`earlier calibration (one pooled fit of ${N + 1} curves per run): ${ms((performance.now() - t0) / reps)}`);

  // 5. scoring
  const k = 2000;
  t0 = performance.now();
  let sink = 0;
  for (let i = 0; i < k; i++) sink += projectCurve(models[i % V], liveCurve).mahalanobisSq;
  console.log(`scoring one smoothed track (projection, ${models[0].eigenvalues.length} components): ${((1000 * (performance.now() - t0)) / k).toFixed(1)} µs`);
  t0 = performance.now();
  for (let i = 0; i < 200; i++) {
    const c = new Float64Array(2 * GRID);
    for (let ch = 0; ch < 2; ch++) applyBasis(ev, smoothGcv(basis, liveRaw.t, liveRaw.y[ch], P).coefficients, c, ch * GRID);
    sink += projectCurve(models[i % V], c).l2sq;
  }
  console.log(`smoothing + scoring one raw track: ${((performance.now() - t0) / 200).toFixed(3)} ms (checksum ${sink.toExponential(3)})`);
}

main();
