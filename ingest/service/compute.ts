/**
 * The computations the service runs off the event loop, as one pure-ish object per process: it
 * holds the simulated tracks of every vignette, fits baselines and judges runs. The worker thread
 * (./compute-worker.ts) wraps it; tests can call it directly. All statistics come from engine/.
 */
import { assessRun, baselineEnvelope, buildBaseline, NotAssessableError, type Baseline, type RunAssessment } from '../../engine/assess.js';
import { adviseEvent, type RunAdvice } from '../../engine/advisor.js';
import type { Diagnosis } from '../../engine/diagnosis.js';
import { DEFAULT_STRATEGY, eventEvidence, type CombinedEvidence, type StreamRun } from '../../engine/evidence/index.js';
import { judgeRun, meanCurve, prepareWindow, rmsDeviation, runWindow, summariseBaseline, type ModelSummary, type RunOutcome } from '../../engine/event.js';
import { practicalDifference, type ChannelDifference } from '../../engine/practical.js';
import type { ChannelEnvelope } from '../../engine/envelope.js';
import type { CalibrationReference } from '../../engine/calibrate.js';
import { fullWindow, observedWindow, windowKey, windowWeights, type TrackWindow } from '../../engine/grid.js';
import { fitProjectionModel, projectRemainder, type Projection, type ProjectionModel } from '../../engine/projection.js';
import type { AnalysisSettings, ChannelSpec, RawTrack } from '../../engine/types.js';
import { decodeFit, encodeFit, fitKey, FIT_CACHE_FORMAT, type FitCacheEntry } from './fit-cache.js';

export interface ComputeConfig {
  readonly vignettes: ReadonlyArray<{ id: string; horizon: number }>;
  readonly channels: readonly ChannelSpec[];
  readonly analysis: AnalysisSettings;
  /** Provisional windows end on multiples of this (s). */
  readonly provisionalStep: number;
}

export interface FitResult {
  readonly vignette: string;
  readonly sims: number;
  readonly summary?: ModelSummary;
  readonly envelope?: ChannelEnvelope[];
  readonly grid?: Float64Array;
  /** A few simulated curves (physical units, channel blocks) for texture on charts. */
  readonly texture?: Float64Array[];
  readonly error?: string;
  readonly ms: number;
  /**
   * The fit cache (./fit-cache.ts): `hit` when the given entry was used; otherwise a fresh entry to
   * store (absent when the fit failed) and, when an entry was given but not used, why.
   */
  readonly cache?: { readonly hit: true } | { readonly hit: false; readonly entry?: FitCacheEntry; readonly rejected?: string };
}

/** How many simulated curves a dashboard draws faintly behind the bands. */
export const TEXTURE_CURVES = 8;

/** A run's judgement (the same fields as the batch path's RunOutcome) plus what a run in flight needs. */
export interface AssessResult extends Omit<RunOutcome, 'error'> {
  readonly mode: 'final' | 'provisional';
  /** Track time up to which the run was judged (provisional), or its last sample (final). */
  readonly upTo: number;
  readonly projection?: Projection;
  /** Scores of the simulated runs and of this run on the first two components of the shared fit. */
  readonly scoreCloud?: { sims: [number[], number[]]; run: [number, number]; eigenvalues: [number, number] };
  readonly error?: string;
  readonly ms: number;
}

/** How the service combines the vignettes' martingales for the event (see Compute.evidence). */
export const EVENT_COMBINATION = 'hedge' as const;

/** One statistic's evidence now: its current value and the run at which it reached 1/alpha. */
export interface StatisticEvidenceView {
  readonly current: number;
  readonly established: boolean;
  readonly crossedAt: number | null;
}

export type StatisticEvidenceViews = { readonly l2: StatisticEvidenceView; readonly score: StatisticEvidenceView; readonly residual: StatisticEvidenceView };

/** Sequential evidence and run-count advice, in plain arrays for the state view. */
export interface EvidenceResult {
  readonly threshold: number;
  /** The event's evidence: the average over statistics of the vignettes' martingales combined. */
  readonly event: { readonly current: number; readonly established: boolean; readonly crossedAt: number | null; readonly martingale: number[]; readonly statistics: StatisticEvidenceViews };
  readonly eventAdvice: AdviceView;
  readonly streams: ReadonlyArray<{
    readonly vignette: string;
    /** The vignette's evidence: the average of its three statistics' martingales. */
    readonly current: number;
    readonly established: boolean;
    readonly crossedAt: number | null;
    readonly runs: number;
    readonly nextRunNeeds: number | null;
    readonly statistics: StatisticEvidenceViews;
    readonly advice: AdviceView;
  }>;
}

function statisticViews(s: { readonly l2: CombinedEvidence; readonly score: CombinedEvidence; readonly residual: CombinedEvidence }): StatisticEvidenceViews {
  const one = (e: CombinedEvidence): StatisticEvidenceView => ({ current: e.current, established: e.established, crossedAt: e.crossedAt });
  return { l2: one(s.l2), score: one(s.score), residual: one(s.residual) };
}

export interface AdviceView {
  readonly additionalRuns: number | null;
  readonly probability: number;
  readonly futile: boolean;
  readonly established: boolean;
  readonly message: string;
}

function adviceView(a: RunAdvice): AdviceView {
  return { additionalRuns: a.additionalRuns, probability: a.probability, futile: a.futile, established: a.established, message: a.message };
}

interface VignetteState {
  spec: { id: string; horizon: number };
  sims: Map<string, RawTrack>;
  baseline?: Baseline;
  simMean?: Float64Array;
  projection?: ProjectionModel;
  /** Scores of the simulated runs on the first two components of the full-window model: the sign reference for score views. */
  referenceScores?: [Float64Array, Float64Array];
  /** The model summary and envelope of the current fit (computed once, cached with it). */
  fitted?: { summary: ModelSummary; envelope: ChannelEnvelope[] };
  /** Per judged window: the simulated curves cut to it and their calibration reference, shared by every run. */
  windows: Map<string, WindowEntry>;
}

interface WindowEntry {
  readonly curves: readonly Float64Array[];
  readonly reference: CalibrationReference;
}

/**
 * Windows kept per vignette besides the full one (which is never dropped). A run in flight moves
 * to a new prefix window at every provisional step, so older entries are rarely asked for again;
 * each holds about N curves and their reference (about 0.5 MB for 200 runs on a 128-point grid
 * with two channels), so this bounds the worker's memory (48 per vignette cost the demo ~200 MB).
 */
const WINDOW_CACHE = 6;

export class Compute {
  private readonly vignettes = new Map<string, VignetteState>();

  constructor(private readonly config: ComputeConfig) {
    for (const v of config.vignettes) this.vignettes.set(v.id, { spec: v, sims: new Map(), windows: new Map() });
  }

  private vignette(id: string): VignetteState {
    const v = this.vignettes.get(id);
    if (!v) throw new NotAssessableError(`vignette ${id} is not in the plan`);
    return v;
  }

  addSims(vignette: string, tracks: readonly RawTrack[]): number {
    const v = this.vignette(vignette);
    for (const t of tracks) v.sims.set(t.track, t);
    return v.sims.size;
  }

  /**
   * (Re)fit a vignette's baseline from all its simulated tracks (in track-id order, as the file
   * reader gives them). With `cached`, an entry of the fit cache whose content key matches these
   * tracks and settings is loaded instead of refitting; the result is the same bit for bit.
   */
  fit(vignette: string, cached?: FitCacheEntry): FitResult {
    const start = performance.now();
    const v = this.vignette(vignette);
    const sims = [...v.sims.values()].sort((a, b) => (a.track < b.track ? -1 : a.track > b.track ? 1 : 0));
    v.windows.clear();
    const key = fitKey(v.spec, this.config.channels, this.config.analysis, sims);
    let rejected: string | undefined;
    if (cached) {
      if (cached.key !== key) rejected = 'stale (the simulated runs or the settings changed)';
      else {
        try {
          this.install(v, decodeFit(cached.body));
          return { ...this.fitView(v as VignetteState & { baseline: Baseline }, sims.length, start), cache: { hit: true } };
        } catch (e) {
          rejected = `unreadable (${e instanceof Error ? e.message : String(e)})`;
        }
      }
    }
    try {
      const baseline = buildBaseline(v.spec.id, v.spec.horizon, this.config.channels, sims, this.config.analysis);
      if (baseline.curves.length < 19) throw new NotAssessableError(`vignette ${vignette} has ${baseline.curves.length} usable simulated tracks; at least 19 are needed`);
      const projection = fitProjectionModel(baseline.curves, windowWeights(baseline.grid, fullWindow(baseline.horizon)), this.config.channels.length);
      this.install(v, { baseline, projection });
      const ready = v as VignetteState & { baseline: Baseline };
      // The full window's reference, so that the first complete run is judged at once.
      const full = fullWindow(baseline.horizon);
      const entry = this.windowEntry(ready, full);
      const view = this.fitView(ready, sims.length, start);
      const { sims: raw, ...rest } = baseline;
      const body = encodeFit({
        format: FIT_CACHE_FORMAT,
        baseline: rest,
        simIds: raw.map((s) => s.track),
        projection: v.projection as ProjectionModel,
        fullWindow: { key: windowKey(full), curves: entry.curves, reference: entry.reference },
        summary: view.summary as ModelSummary,
        envelope: view.envelope as ChannelEnvelope[],
      });
      return { ...view, ms: performance.now() - start, cache: { hit: false, entry: { key, body }, rejected } };
    } catch (e) {
      v.baseline = undefined;
      v.simMean = undefined;
      v.projection = undefined;
      v.fitted = undefined;
      return { vignette, sims: sims.length, error: e instanceof Error ? e.message : String(e), ms: performance.now() - start, cache: { hit: false, rejected } };
    }
  }

  /** Make a fit (fresh, or from the cache with its summary, envelope and full-window reference) the vignette's model. */
  private install(v: VignetteState, fit: { baseline: Baseline | Omit<Baseline, 'sims'>; projection: ProjectionModel; simIds?: readonly string[]; fullWindow?: { key: string; curves: readonly Float64Array[]; reference: CalibrationReference }; summary?: ModelSummary; envelope?: ChannelEnvelope[] }): void {
    let baseline: Baseline;
    if ('sims' in fit.baseline) baseline = fit.baseline;
    else {
      const ids = fit.simIds ?? [];
      const sims = ids.map((id) => {
        const s = v.sims.get(id);
        if (!s) throw new Error(`simulated run ${id} of the cached fit is missing`);
        return s;
      });
      baseline = { ...fit.baseline, sims };
    }
    v.baseline = baseline;
    v.simMean = meanCurve(baseline.curves);
    v.projection = fit.projection;
    // The projection model's leading components are those of the simulated runs over the whole horizon.
    const pm = fit.projection.fpca;
    v.referenceScores = [Float64Array.from(pm.scores, (r) => r[0] ?? 0), Float64Array.from(pm.scores, (r) => r[1] ?? 0)];
    v.fitted = fit.summary && fit.envelope ? { summary: fit.summary, envelope: fit.envelope } : undefined;
    if (fit.fullWindow) v.windows.set(fit.fullWindow.key, { curves: fit.fullWindow.curves, reference: fit.fullWindow.reference });
  }

  private fitView(v: VignetteState & { baseline: Baseline }, sims: number, start: number): FitResult {
    const baseline = v.baseline;
    v.fitted ??= { summary: summariseBaseline(baseline), envelope: baselineEnvelope(baseline) };
    return {
      vignette: baseline.vignette,
      sims,
      summary: v.fitted.summary,
      envelope: v.fitted.envelope,
      grid: baseline.grid.points,
      texture: baseline.curves.slice(0, TEXTURE_CURVES).map((c) => Float64Array.from(c)),
      ms: performance.now() - start,
    };
  }

  /**
   * The simulated curves cut to a window and their calibration reference (leave-one-out statistics,
   * engine/calibrate.ts), computed once per window and shared by every run judged on it.
   */
  private windowEntry(v: VignetteState & { baseline: Baseline }, window: TrackWindow): WindowEntry {
    const key = windowKey(window);
    const hit = v.windows.get(key);
    if (hit) {
      // Most recently used last.
      v.windows.delete(key);
      v.windows.set(key, hit);
      return hit;
    }
    const { curves, reference } = prepareWindow(v.baseline, window);
    if (!reference) throw new NotAssessableError(`only ${curves.length} simulated tracks cover the window; at least 19 are needed for p = 0.05`);
    const entry = { curves, reference };
    v.windows.set(key, entry);
    if (v.windows.size > WINDOW_CACHE + 1) {
      const full = windowKey(fullWindow(v.baseline.horizon));
      const oldest = [...v.windows.keys()].find((k) => k !== full);
      if (oldest !== undefined) v.windows.delete(oldest);
    }
    return entry;
  }

  /** The prefix window of a run in flight: [0, t_q] with t_q on the provisional step, when clean. */
  private provisionalWindow(run: RawTrack, v: VignetteState & { baseline: Baseline }): { window: TrackWindow; upTo: number; cut: RawTrack } | undefined {
    const step = this.config.provisionalStep;
    const last = run.t[run.t.length - 1] ?? 0;
    const upTo = Math.floor(last / step) * step;
    if (upTo < step) return undefined;
    let n = 0;
    while (n < run.t.length && run.t[n] <= upTo) n++;
    const cut: RawTrack = { ...run, t: run.t.subarray(0, n), values: run.values.map((x) => x.subarray(0, n)) };
    const own = observedWindow(cut.t, v.baseline.horizon, this.config.analysis.gapFactor, v.baseline.grid.step);
    const edge = Math.max(v.baseline.grid.step, 2);
    const clean = own.gaps.length === 0 && cut.t.length > 0 && cut.t[0] <= edge;
    const window: TrackWindow = clean ? { intervals: [[0, upTo]], span: own.span, gaps: [], partial: upTo < v.baseline.horizon, full: false, nominalInterval: own.nominalInterval } : own;
    return { window, upTo, cut };
  }

  /**
   * Anytime-valid evidence per statistic, per vignette and for the event from the final p-values
   * (each run's three per-statistic p-values, and its overall one) in the order the runs completed,
   * and the run-count advice (engine/evidence/, engine/advisor.ts). The lattice of each vignette's
   * p-values is its number of simulated runs + 1 (continuous p-values are rounded up to it).
   */
  evidence(runs: readonly StreamRun[], alpha: number): EvidenceResult {
    const streams = this.config.vignettes.map((v) => v.id);
    const resolutions = Object.fromEntries(this.config.vignettes.map((v) => [v.id, Math.max(2, (this.vignettes.get(v.id)?.baseline?.curves.length ?? 200) + 1)]));
    // The event's evidence, per statistic, is the hedge over the plan's vignettes (fixed before the
    // event): half the product of the vignettes' martingales (fast when a discrepancy is shared by
    // many conditions) and half their average (not dragged down by the agreeing conditions when it
    // is confined to a few); then the average over the three statistics. Each is a test martingale
    // (engine/evidence/event.ts). Measured by `npm run bench:evidence`: with 6 of 12 vignettes
    // shifted, the average alone needs about 3 times as many runs as the hedge.
    const ev = eventEvidence(runs, alpha, DEFAULT_STRATEGY, { streams, resolutions, combine: EVENT_COMBINATION });
    const advice = adviseEvent(runs, alpha, { streams, resolutions, combine: EVENT_COMBINATION, draws: 400 });
    return {
      threshold: ev.threshold,
      event: { current: ev.current, established: ev.established, crossedAt: ev.crossedAt, martingale: Array.from(ev.martingale), statistics: statisticViews(ev.statistics) },
      eventAdvice: adviceView(advice.event),
      streams: ev.streams.map((s) => {
        const a = advice.streams.find((x) => x.stream === s.stream);
        return {
          vignette: s.stream,
          current: s.evidence.current,
          established: s.evidence.established,
          crossedAt: s.evidence.crossedAt,
          runs: s.evidence.martingale.length,
          nextRunNeeds: s.evidence.nextRunNeeds,
          statistics: statisticViews(s.statistics),
          advice: a ? adviceView(a.advice) : { additionalRuns: null, probability: 0, futile: false, established: false, message: 'no runs yet' },
        };
      }),
    };
  }

  assess(vignette: string, run: RawTrack, mode: 'final' | 'provisional'): AssessResult {
    const start = performance.now();
    const v = this.vignette(vignette);
    const base = { vignette, track: run.track, mode, samples: run.t.length };
    const last = run.t[run.t.length - 1] ?? 0;
    if (!v.baseline || !v.simMean || !v.projection) {
      return { ...base, upTo: last, error: `the baseline of vignette ${vignette} is not ready`, ms: performance.now() - start };
    }
    const ready = v as VignetteState & { baseline: Baseline };
    try {
      let assessment: RunAssessment;
      let upTo = last;
      let practical: ChannelDifference[] | undefined;
      let diagnosis: Diagnosis | undefined;
      if (mode === 'final') {
        const window = runWindow(ready.baseline, run);
        const entry = this.windowEntry(ready, window);
        const outcome = judgeRun(ready.baseline, run, v.simMean, { window, curves: entry.curves, reference: entry.reference });
        assessment = outcome.assessment as RunAssessment;
        practical = outcome.practical;
        diagnosis = outcome.diagnosis;
      } else {
        const p = this.provisionalWindow(run, ready);
        if (!p) return { ...base, upTo: 0, error: 'not enough of the run yet', ms: performance.now() - start };
        upTo = p.upTo;
        const entry = this.windowEntry(ready, p.window);
        assessment = assessRun(ready.baseline, p.cut, { window: p.window, windowCurves: entry.curves, reference: entry.reference });
        practical = practicalDifference(assessment.curve, assessment.active, entry.curves, ready.baseline.grid, this.config.channels);
      }
      const projection = projectRemainder(v.projection, assessment.curve, assessment.active);
      const m = assessment.result.model;
      const N = m.n;
      const k2 = Math.min(2, m.eigenvalues.length);
      // Each fit's components have an arbitrary sign; orient them like the full-window model's (by
      // the simulated runs' scores) so that a run's trail over successive fits does not jump.
      const ref = v.referenceScores;
      const sign = (k: number): number => {
        if (!ref || k >= k2 || ref[k].length !== N) return 1;
        let c = 0;
        for (let i = 0; i < N; i++) c += m.scores[i][k] * ref[k][i];
        return c < 0 ? -1 : 1;
      };
      const signs = [sign(0), sign(1)];
      const col = (k: number) => (k < k2 ? Array.from({ length: N }, (_, i) => signs[k] * m.scores[i][k]) : new Array<number>(N).fill(0));
      const scoreCloud = {
        sims: [col(0), col(1)] as [number[], number[]],
        run: [k2 > 0 ? signs[0] * assessment.result.liveScores[0] : 0, k2 > 1 ? signs[1] * assessment.result.liveScores[1] : 0] as [number, number],
        eigenvalues: [m.eigenvalues[0] ?? 0, m.eigenvalues[1] ?? 0] as [number, number],
      };
      return { ...base, upTo, assessment, rms: rmsDeviation(assessment, ready.baseline, v.simMean), practical, diagnosis, projection, scoreCloud, ms: performance.now() - start };
    } catch (e) {
      if (!(e instanceof NotAssessableError)) throw e;
      return { ...base, upTo: last, error: e.message, ms: performance.now() - start };
    }
  }
}
