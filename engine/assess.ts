/**
 * One vignette's baseline and the assessment of one run against it: the whole per-run method,
 * built from the routines of this folder.
 *
 *   raw track ──restrict to the run's observed window──▶ P-spline per channel (./pspline.ts)
 *             ──▶ curve on the common grid ──▶ leave-one-out FPCA statistics (./calibrate.ts)
 *
 * Like with like: a run with a dropout, a late start or an early end is judged only on the part of
 * [0, horizon] it observed (./grid.ts observedWindow), and every simulated track is cut to that
 * same window and smoothed again from its raw samples, so the live curve and the simulated curves
 * come out of the same procedure on the same span. A run that covers the whole horizon uses the
 * baseline's cached full-window curves.
 */
import { applyBasis, evaluateBasis, splineBasis, type BasisEvaluation, type SplineBasis } from './bspline.js';
import { buildReference, conformalAssess, DEFAULT_TIE_SEED, type CalibrationReference, type ConformalResult } from './calibrate.js';
import { seedFor } from './rng.js';
import { simulatedEnvelope, type ChannelEnvelope } from './envelope.js';
import { covers, fullWindow, inWindow, observedWindow, uniformGrid, windowKey, windowWeights, type Grid, type TrackWindow } from './grid.js';
import { differencePenaltyBand, MIN_SAMPLES, smoothGcv, type PSplineFit } from './pspline.js';
import type { AnalysisSettings, ChannelSpec, RawTrack } from './types.js';

/** Everything needed to judge runs of one vignette. */
export interface Baseline {
  readonly vignette: string;
  readonly horizon: number;
  readonly channels: readonly ChannelSpec[];
  readonly settings: AnalysisSettings;
  readonly grid: Grid;
  readonly basis: SplineBasis;
  readonly gridEval: BasisEvaluation;
  readonly penalty: Float64Array;
  /** Raw simulated tracks that cover the whole horizon (kept for re-smoothing on a window). */
  readonly sims: readonly RawTrack[];
  /** Their smoothed curves on the full grid, channel blocks of M values, physical units. */
  readonly curves: readonly Float64Array[];
  /** Simulated tracks left out because they do not cover the horizon. */
  readonly excluded: readonly string[];
}

export interface SmoothedTrack {
  /** Channel blocks of M grid values (physical units; values outside the window are extrapolated and must not be judged). */
  readonly curve: Float64Array;
  readonly fits: readonly PSplineFit[];
}

/** Smooth every channel of a track onto the grid. */
export function smoothTrack(track: RawTrack, basis: SplineBasis, gridEval: BasisEvaluation, penalty: Float64Array): SmoothedTrack {
  const M = gridEval.points.length;
  const C = track.values.length;
  const curve = new Float64Array(C * M);
  const fits: PSplineFit[] = [];
  for (let c = 0; c < C; c++) {
    const fit = smoothGcv(basis, track.t, track.values[c], penalty);
    applyBasis(gridEval, fit.coefficients, curve, c * M);
    fits.push(fit);
  }
  return { curve, fits };
}

/** The samples of a track that fall inside a window. */
export function restrictTrack(track: RawTrack, window: TrackWindow): RawTrack {
  if (window.full) return track;
  const keep: number[] = [];
  for (let i = 0; i < track.t.length; i++) if (inWindow(window, track.t[i])) keep.push(i);
  return {
    vignette: track.vignette,
    track: track.track,
    t: Float64Array.from(keep, (i) => track.t[i]),
    values: track.values.map((v) => Float64Array.from(keep, (i) => v[i])),
  };
}

function edgeTolerance(baseline: Baseline): number {
  return Math.max(baseline.grid.step, 2);
}

/** Build a vignette's baseline: smooth every simulated track that covers [0, horizon]. */
export function buildBaseline(
  vignette: string,
  horizon: number,
  channels: readonly ChannelSpec[],
  sims: readonly RawTrack[],
  settings: AnalysisSettings,
  onProgress?: (done: number, total: number) => void,
): Baseline {
  const grid = uniformGrid(horizon, settings.gridSize);
  const basis = splineBasis(horizon, settings.segments);
  const gridEval = evaluateBasis(basis, grid.points);
  const penalty = differencePenaltyBand(basis.size);
  const full = fullWindow(horizon);
  const kept: RawTrack[] = [];
  const curves: Float64Array[] = [];
  const excluded: string[] = [];
  const edge = Math.max(grid.step, 2);
  sims.forEach((sim, i) => {
    if (sim.values.length !== channels.length) throw new RangeError(`buildBaseline: track ${sim.track} has ${sim.values.length} channels, plan has ${channels.length}`);
    if (sim.t.length < MIN_SAMPLES || !covers(sim.t, full, edge)) {
      excluded.push(sim.track);
    } else {
      kept.push(sim);
      curves.push(smoothTrack(sim, basis, gridEval, penalty).curve);
    }
    onProgress?.(i + 1, sims.length);
  });
  return { vignette, horizon, channels, settings, grid, basis, gridEval, penalty, sims: kept, curves, excluded };
}

/** Simulated curves for a window: the cached ones for the full window, else re-smoothed. */
export function curvesForWindow(baseline: Baseline, window: TrackWindow): { curves: Float64Array[]; skipped: number } {
  if (window.full) return { curves: [...baseline.curves], skipped: 0 };
  const edge = edgeTolerance(baseline);
  const curves: Float64Array[] = [];
  let skipped = 0;
  for (const sim of baseline.sims) {
    const cut = restrictTrack(sim, window);
    if (cut.t.length < MIN_SAMPLES || !covers(sim.t, window, edge)) {
      skipped++;
      continue;
    }
    curves.push(smoothTrack(cut, baseline.basis, baseline.gridEval, baseline.penalty).curve);
  }
  return { curves, skipped };
}

export type RunFlag = 'partial' | 'dropout' | 'few-samples';

export interface RunAssessment {
  readonly vignette: string;
  readonly track: string;
  readonly window: TrackWindow;
  readonly windowKey: string;
  readonly flags: readonly RunFlag[];
  /** Number of simulated tracks the run was calibrated against. */
  readonly simsUsed: number;
  readonly result: ConformalResult;
  readonly smoothing: readonly PSplineFit[];
  /** The run's smoothed curve (physical units, channel blocks on the grid). */
  readonly curve: Float64Array;
  /** Grid points inside the judged window. */
  readonly active: Uint8Array;
}

export class NotAssessableError extends Error {
  readonly code = 'RUN_NOT_ASSESSABLE';
  constructor(message: string) {
    super(message);
    this.name = 'NotAssessableError';
  }
}

export interface AssessOptions {
  /** Use this window instead of the run's own (e.g. to judge a prefix). */
  readonly window?: TrackWindow;
  /** Curves for the window, when the caller has them cached. */
  readonly windowCurves?: readonly Float64Array[];
  /** The window's calibration reference built from `windowCurves`, when the caller has it cached. */
  readonly reference?: CalibrationReference;
}

/** Judge one run against its vignette's baseline (see the module comment). */
export function assessRun(baseline: Baseline, run: RawTrack, options: AssessOptions = {}): RunAssessment {
  const { grid, settings } = baseline;
  if (run.values.length !== baseline.channels.length) {
    throw new NotAssessableError(`run ${run.track} has ${run.values.length} channels, the plan has ${baseline.channels.length}`);
  }
  if (run.t.length < MIN_SAMPLES) throw new NotAssessableError(`run ${run.track} has ${run.t.length} samples; at least ${MIN_SAMPLES} are needed`);
  const window = options.window ?? observedWindow(run.t, baseline.horizon, settings.gapFactor, grid.step);
  const flags: RunFlag[] = [];
  if (window.partial) flags.push('partial');
  if (window.gaps.length > 0) flags.push('dropout');
  const weightsOnGrid = windowWeights(grid, window);
  const active = Uint8Array.from(weightsOnGrid, (w) => (w > 0 ? 1 : 0));
  let activeCount = 0;
  for (const a of active) activeCount += a;
  if (activeCount < 4) throw new NotAssessableError(`run ${run.track} covers ${activeCount} grid points; at least 4 are needed`);
  const sims = options.windowCurves ?? curvesForWindow(baseline, window).curves;
  if (sims.length < 19) {
    throw new NotAssessableError(`only ${sims.length} simulated tracks cover the window of run ${run.track}; at least 19 are needed for p = 0.05`);
  }
  const cut = restrictTrack(run, window);
  if (cut.t.length < MIN_SAMPLES) throw new NotAssessableError(`run ${run.track} has ${cut.t.length} samples in its window`);
  const smoothed = smoothTrack(cut, baseline.basis, baseline.gridEval, baseline.penalty);
  if (cut.t.length < 3 * baseline.basis.size) flags.push('few-samples');
  const seed = settings.seed ?? DEFAULT_TIE_SEED;
  const reference = options.reference ?? buildReference(sims, weightsOnGrid, baseline.channels.length, settings.components, seed);
  const result = conformalAssess(sims, smoothed.curve, weightsOnGrid, baseline.channels.length, settings.components, {
    reference,
    tieSeed: seedFor(seed, run.vignette, run.track),
  });
  return {
    vignette: run.vignette,
    track: run.track,
    window,
    windowKey: windowKey(window),
    flags,
    simsUsed: sims.length,
    result,
    smoothing: smoothed.fits,
    curve: smoothed.curve,
    active,
  };
}

/** Envelopes of a baseline on the full window, per channel in physical units. */
export function baselineEnvelope(baseline: Baseline): ChannelEnvelope[] {
  return simulatedEnvelope(baseline.curves, baseline.channels.length, baseline.settings.alpha);
}
