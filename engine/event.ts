/**
 * A whole event: per-vignette baselines, every live run judged against its vignette, and each
 * statistic's p-values combined across runs with their calibrated minimum (./combine-statistics.ts). Used alike by the batch command and the live
 * service, so both give the same numbers.
 */
import { assessRun, buildBaseline, curvesForWindow, NotAssessableError, type Baseline, type RunAssessment } from './assess.js';
import { diagnoseRun, type Diagnosis } from './diagnosis.js';
import { observedWindow } from './grid.js';
import { practicalDifference, type ChannelDifference } from './practical.js';
import { buildReference, channelScales, DEFAULT_TIE_SEED, joinedWeights, type CalibrationReference } from './calibrate.js';
import { combineStatistics, type RunPValues, type StatisticsCombined } from './combine-statistics.js';
import { fitFpca } from './fpca.js';
import { fullWindow, windowKey, windowWeights, type TrackWindow } from './grid.js';
import type { AnalysisSettings, ChannelSpec, RawTrack } from './types.js';

export interface VignetteSpec {
  readonly id: string;
  readonly horizon: number;
}

/** Summary of a vignette's simulated tracks alone (full window). */
export interface ModelSummary {
  readonly sims: number;
  readonly excludedSims: number;
  readonly components: number;
  readonly varianceExplained: number;
  /** Leading eigenvalues (scaled units), at most 10. */
  readonly eigenvalues: number[];
  /** Channel scales s_c in channel units. */
  readonly channelScales: number[];
}

export function summariseBaseline(baseline: Baseline): ModelSummary {
  const gw = windowWeights(baseline.grid, fullWindow(baseline.horizon));
  const scales = channelScales(baseline.curves, gw, baseline.channels.length);
  const model = fitFpca(baseline.curves, joinedWeights(gw, scales), baseline.settings.components);
  return {
    sims: baseline.curves.length,
    excludedSims: baseline.excluded.length,
    components: model.eigenvalues.length,
    varianceExplained: model.varianceExplained,
    eigenvalues: Array.from(model.eigenvalues.subarray(0, 10)),
    channelScales: Array.from(scales),
  };
}

/** Root-mean-square deviation of the run from the simulated mean over its window, per channel (physical units). */
export function rmsDeviation(run: RunAssessment, baseline: Baseline, simMean: Float64Array): number[] {
  const M = baseline.grid.points.length;
  const out: number[] = [];
  for (let c = 0; c < baseline.channels.length; c++) {
    let s = 0;
    let n = 0;
    for (let g = 0; g < M; g++) {
      if (!run.active[g]) continue;
      const r = run.curve[c * M + g] - simMean[c * M + g];
      s += r * r;
      n++;
    }
    out.push(n > 0 ? Math.sqrt(s / n) : Number.NaN);
  }
  return out;
}

export function meanCurve(curves: readonly Float64Array[]): Float64Array {
  const m = new Float64Array(curves[0]?.length ?? 0);
  for (const c of curves) for (let i = 0; i < m.length; i++) m[i] += c[i];
  for (let i = 0; i < m.length; i++) m[i] /= curves.length;
  return m;
}

export interface RunOutcome {
  readonly vignette: string;
  readonly track: string;
  readonly samples: number;
  readonly assessment?: RunAssessment;
  /** Physical-unit RMS deviation from the simulated mean, per channel. */
  readonly rms?: number[];
  /** Where and by how much the run leaves the simulated 95 % band, per channel (physical units). */
  readonly practical?: ChannelDifference[];
  /** The dominant kind of discrepancy of a run that stands out (overall p ≤ alpha). */
  readonly diagnosis?: Diagnosis;
  /** Why the run could not be judged. */
  readonly error?: string;
}

export interface VignetteOutcome {
  readonly id: string;
  readonly horizon: number;
  readonly summary?: ModelSummary;
  readonly error?: string;
  /** Each statistic combined across this vignette's runs, and their calibrated minimum (when it has judged runs). */
  readonly combined?: StatisticsCombined;
}

export interface EventAssessment {
  readonly vignettes: VignetteOutcome[];
  readonly runs: RunOutcome[];
  /** Each statistic combined across every judged run, and their calibrated minimum. */
  readonly combined?: StatisticsCombined;
}

export type EventProgress = (stage: 'baseline' | 'runs', vignette: string, done: number, total: number) => void;

/** A judged window: the simulated curves cut to it and their calibration reference (./calibrate.ts). */
export interface PreparedWindow {
  readonly window: TrackWindow;
  readonly curves: readonly Float64Array[];
  /** Absent when fewer than 19 simulated tracks cover the window (no run can be judged on it). */
  readonly reference?: CalibrationReference;
}

/**
 * The simulated curves of a window (the cached ones for the full window, else re-smoothed) and
 * their calibration reference. Depends on the baseline and the window only, so callers that judge
 * many runs keep it per window (the batch path per event, the service per vignette).
 */
export function prepareWindow(baseline: Baseline, window: TrackWindow): PreparedWindow {
  const curves = curvesForWindow(baseline, window).curves;
  const s = baseline.settings;
  const reference = curves.length >= 19 ? buildReference(curves, windowWeights(baseline.grid, window), baseline.channels.length, s.components, s.seed ?? DEFAULT_TIE_SEED) : undefined;
  return { window, curves, reference };
}

/** The window a run is judged on: the part of the horizon it observed (./grid.ts). */
export function runWindow(baseline: Baseline, run: RawTrack): TrackWindow {
  return observedWindow(run.t, baseline.horizon, baseline.settings.gapFactor, baseline.grid.step);
}

/**
 * Judge one run and describe it: the assessment, the practical difference in physical units, and,
 * for a run that stands out at the plan's alpha, the kind of discrepancy. The batch command and the
 * live service both call this, so they report the same numbers.
 */
export function judgeRun(baseline: Baseline, run: RawTrack, simMean: Float64Array, prepared: PreparedWindow = prepareWindow(baseline, runWindow(baseline, run))): RunOutcome {
  // One calibration reference for the judgement and the diagnosis's reassessments on this window.
  const { window, curves, reference } = prepared;
  const a = assessRun(baseline, run, { window, windowCurves: curves, reference });
  const practical = practicalDifference(a.curve, a.active, curves, baseline.grid, baseline.channels);
  const standsOut = a.result.pValues.overall <= baseline.settings.alpha;
  const diagnosis = standsOut ? diagnoseRun(baseline, run, a, { alpha: baseline.settings.alpha, windowCurves: curves, reference }) : undefined;
  return { vignette: run.vignette, track: run.track, samples: run.t.length, assessment: a, rms: rmsDeviation(a, baseline, simMean), practical, diagnosis };
}

/**
 * Judge every live run. Runs of a vignette without usable simulated tracks, or that cannot be
 * judged (too few samples), are reported with their reason and left out of the combination.
 */
export function assessEvent(
  vignettes: readonly VignetteSpec[],
  channels: readonly ChannelSpec[],
  settings: AnalysisSettings,
  sims: readonly RawTrack[],
  live: readonly RawTrack[],
  onProgress?: EventProgress,
): EventAssessment {
  const vOut: VignetteOutcome[] = [];
  const runs: RunOutcome[] = [];
  for (const v of vignettes) {
    const vSims = sims.filter((s) => s.vignette === v.id);
    const vLive = live.filter((s) => s.vignette === v.id);
    let baseline: Baseline | undefined;
    let summary: ModelSummary | undefined;
    let error: string | undefined;
    if (vSims.length > 0 || vLive.length > 0) {
      try {
        baseline = buildBaseline(v.id, v.horizon, channels, vSims, settings, (d, t) => onProgress?.('baseline', v.id, d, t));
        if (baseline.curves.length < 19) throw new NotAssessableError(`vignette ${v.id} has ${baseline.curves.length} usable simulated tracks; at least 19 are needed`);
        summary = summariseBaseline(baseline);
      } catch (e) {
        error = e instanceof Error ? e.message : String(e);
        baseline = undefined;
      }
    }
    const simMean = baseline ? meanCurve(baseline.curves) : undefined;
    const pvals: RunPValues[] = [];
    // Runs judged on the same window share its simulated curves and their calibration reference.
    const windows = new Map<string, PreparedWindow>();
    const prepare = (b: Baseline, run: RawTrack): PreparedWindow => {
      const window = runWindow(b, run);
      const key = windowKey(window);
      let hit = windows.get(key);
      if (!hit) {
        hit = prepareWindow(b, window);
        windows.set(key, hit);
      }
      return { ...hit, window };
    };
    vLive.forEach((run, i) => {
      if (!baseline || !simMean) {
        runs.push({ vignette: v.id, track: run.track, samples: run.t.length, error: error ?? `vignette ${v.id} has no simulated tracks` });
        return;
      }
      try {
        const outcome = judgeRun(baseline, run, simMean, prepare(baseline, run));
        runs.push(outcome);
        if (outcome.assessment) pvals.push(runPValues(outcome.assessment));
      } catch (e) {
        if (!(e instanceof NotAssessableError)) throw e;
        runs.push({ vignette: v.id, track: run.track, samples: run.t.length, error: e.message });
      }
      onProgress?.('runs', v.id, i + 1, vLive.length);
    });
    vOut.push({
      id: v.id,
      horizon: v.horizon,
      summary,
      error,
      combined: pvals.length > 0 ? combineStatistics(pvals, settings.combination, settings.seed ?? 1, v.id) : undefined,
    });
  }
  const all = runs.flatMap((r) => (r.assessment ? [runPValues(r.assessment)] : []));
  return { vignettes: vOut, runs, combined: all.length > 0 ? combineStatistics(all, settings.combination, settings.seed ?? 1, EVENT_LABEL) : undefined };
}

/** The label of the event-wide family in the seed of the combination's draws (vignettes use their id). */
export const EVENT_LABEL = '\u0000event';

/** A judged run's three p-values and its window's null triples, for ./combine-statistics.ts. */
export function runPValues(a: RunAssessment): RunPValues {
  const { pValues, nullPValues } = a.result;
  return { pValues: { l2: pValues.l2, score: pValues.score, residual: pValues.residual }, nullPValues };
}
