/**
 * What dashboards and scripts see of the event: plain JSON shapes, sent as a snapshot and then as
 * deltas over /watch, and served by the HTTP read endpoints. Provisional values (a run still in
 * flight) are always marked `provisional`; only final values enter combined evidence.
 */
import type { ChannelEnvelope } from '../../engine/envelope.js';
import type { DiagnosisRow, PracticalRow } from '../report.js';
import type { EvidenceResult } from './compute.js';

/** Anytime-valid evidence (test martingale, threshold 1/alpha) and the run-count advice. */
export type EvidenceView = EvidenceResult & { readonly note: string };
export type VignetteEvidenceView = EvidenceResult['streams'][number];

export interface PValues {
  readonly l2: number;
  readonly score: number;
  readonly residual: number;
  readonly overall: number;
}

export interface Judgement {
  readonly kind: 'provisional' | 'final';
  /** Track time up to which the run was judged, s. */
  readonly upTo: number;
  readonly pValues: PValues;
  readonly statistics: { readonly l2: number; readonly score: number; readonly residual: number };
  readonly simsUsed: number;
  readonly components: number;
  readonly flags: readonly string[];
  /** RMS deviation from the simulated mean per channel (channel units). */
  readonly rms: readonly number[];
  /** Practical difference in physical units (a separate answer from the p-value). */
  readonly practical?: readonly PracticalRow[];
  /** Final judgements of runs that stand out: the dominant kind of discrepancy. */
  readonly diagnosis?: DiagnosisRow;
}

export interface RunView {
  readonly key: string;
  readonly vignette: string;
  readonly track: string;
  readonly source: 'live' | 'sim';
  readonly status: 'in-flight' | 'complete';
  readonly points: number;
  readonly lastT: number;
  /** Server clock (ms since the epoch) when the run was opened / closed. */
  readonly openedAt: number;
  readonly closedAt?: number;
  readonly judgement?: Judgement;
  /** Why the run could not be judged (yet). */
  readonly notJudged?: string;
  readonly flags: readonly string[];
  readonly notes: number;
}

export interface VignetteView {
  readonly id: string;
  readonly label?: string;
  readonly horizon: number;
  readonly condition?: Readonly<Record<string, string | number>>;
  readonly baseline: {
    readonly status: 'waiting' | 'fitting' | 'ready' | 'failed';
    readonly sims: number;
    readonly components?: number;
    readonly varianceExplained?: number;
    readonly reason?: string;
  };
  readonly combined?: CombinedView;
  /** Sequential evidence of this vignette's runs and the advice on more runs. */
  readonly evidence?: VignetteEvidenceView;
  /** Holm-adjusted over the event's vignettes, and its verdict at the plan's alpha. */
  readonly adjustedPValue?: number;
  readonly verdict: 'distinguishable' | 'not distinguishable' | 'not judged';
}

export interface CombinedView {
  readonly method: string;
  /** The smallest of the three per-statistic combined p-values. */
  readonly statistic: number;
  /** That minimum calibrated over the three statistics (engine/combine-statistics.ts): the headline. */
  readonly pValue: number;
  readonly count: number;
  /** Each statistic's p-values combined across the runs by the plan's method. */
  readonly byStatistic: { readonly l2: number; readonly score: number; readonly residual: number };
  /** The statistic with the smallest combined p-value. */
  readonly leading: 'l2' | 'score' | 'residual';
  /** Fixed-sample combination: valid only for a run count fixed in advance. */
  readonly note: string;
}

export interface LogEntryView {
  readonly id: number;
  readonly at: number;
  readonly kind: 'note' | 'flag' | 'event';
  readonly vignette?: string;
  readonly track?: string;
  readonly t?: number;
  readonly text: string;
  readonly author?: string;
}

/** The combined evidence after each completed run, in the order the runs completed. */
export interface TimelinePoint {
  readonly at: number;
  readonly run: string;
  readonly runs: number;
  /** Fixed-sample combination of the final p-values so far (calibrated minimum over the statistics). */
  readonly pValue: number;
  /** Each statistic's combined p-value so far. */
  readonly byStatistic?: { readonly l2: number; readonly score: number; readonly residual: number };
  /** The event's anytime-valid evidence (test martingale) after this run. */
  readonly evidence?: number;
}

/** Whether the journal accepts writes; while it does not, nothing is acknowledged. */
export interface JournalStatusView {
  readonly writable: boolean;
  /** What failed (disk full, read-only, I/O error), while not writable. */
  readonly reason?: string;
  /** Server clock (ms since the epoch) of the first failure. */
  readonly since?: number;
}

export interface EventView {
  readonly plan: {
    readonly name: string;
    readonly alpha: number;
    readonly combination: string;
    readonly channels: ReadonlyArray<{ name: string; unit: string }>;
  };
  readonly vignettes: readonly VignetteView[];
  readonly runs: readonly RunView[];
  readonly combined?: CombinedView & { readonly alpha: number; readonly distinguishable: boolean };
  readonly timeline: readonly TimelinePoint[];
  readonly evidence?: EvidenceView;
  readonly log: readonly LogEntryView[];
  readonly cautions: readonly string[];
  readonly journal: JournalStatusView;
  /**
   * Set by a gathering process (`plumbline gather`, ingest/broker/gather.ts): the monitors that
   * answered, whose views it merges (each vignette from the monitor that announced it last). Such a view has no debrief package of its own; each monitor offers its shard's.
   */
  readonly gathered?: ReadonlyArray<{ readonly shard: string; readonly url: string }>;
}

/** One run in full: raw samples, smoothed curve, envelope of its vignette, projection, scores. */
export interface RunDetail {
  readonly run: RunView;
  readonly channels: ReadonlyArray<{ name: string; unit: string }>;
  readonly raw: { readonly t: number[]; readonly values: number[][] };
  readonly grid?: number[];
  readonly smoothed?: number[][];
  /** Grid points inside the judged window. */
  readonly judged?: boolean[];
  /** A few simulated runs of the vignette (per channel, on the grid), drawn faintly for texture. */
  readonly texture?: number[][][];
  readonly envelope?: ReadonlyArray<{
    readonly mean: number[];
    readonly bands: ReadonlyArray<{ level: number; lower: number[]; upper: number[] }>;
    readonly simultaneous: { level: number; lower: number[]; upper: number[] };
  }>;
  readonly projection?: { readonly from: number; readonly mean: number[][]; readonly lower: number[][]; readonly upper: number[][]; readonly level: number };
  readonly scores?: { readonly sims: [number[], number[]]; readonly trail: Array<[number, number, number]>; readonly eigenvalues: [number, number] };
  readonly reference?: { readonly l2: number[]; readonly score: number[]; readonly residual: number[] };
  readonly log: readonly LogEntryView[];
}

/**
 * Messages on /watch: a snapshot first (and again after a dashboard fell behind), then `updates`,
 * each the changes of one short window (`dashboardWindowMs`), at most one per key. A run whose
 * only change is new points comes as `progress` (its point count and latest time); any other
 * change of a run sends the whole `run`.
 */
export type WatchMessage =
  | { readonly type: 'snapshot'; readonly state: EventView }
  | { readonly type: 'updates'; readonly updates: readonly WatchUpdate[] }
  | WatchUpdate;

export type WatchUpdate =
  | { readonly type: 'run'; readonly run: RunView }
  | { readonly type: 'progress'; readonly key: string; readonly points: number; readonly lastT: number }
  | { readonly type: 'vignette'; readonly vignette: VignetteView }
  | { readonly type: 'combined'; readonly combined: EventView['combined']; readonly timeline: EventView['timeline']; readonly evidence?: EventView['evidence'] }
  | { readonly type: 'log'; readonly entry: LogEntryView }
  | { readonly type: 'journal'; readonly journal: JournalStatusView };

/** Envelope arrays for JSON (NaN-free). */
export function envelopeView(env: readonly ChannelEnvelope[]): NonNullable<RunDetail['envelope']> {
  return env.map((c) => ({
    mean: Array.from(c.mean),
    bands: c.pointwise.map((b) => ({ level: b.level, lower: Array.from(b.lower), upper: Array.from(b.upper) })),
    simultaneous: { level: c.simultaneous.level, lower: Array.from(c.simultaneous.lower), upper: Array.from(c.simultaneous.upper) },
  }));
}
