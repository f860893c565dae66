/**
 * A track as the service holds it: its identity, its committed points (./point-store.ts) and the
 * points staged for the next commit, its contiguous committed sequence, and what judging and the
 * quality monitor attached to it. `newTrack` makes one, `rawTrack` gives its committed points as
 * the engine takes them, `advanceCommitted` moves the committed sequence over what is stored.
 */
import type { PerStatistic } from '../../engine/calibrate.js';
import type { RawTrack } from '../../engine/types.js';
import { unwrapCircular } from '../../engine/unwrap.js';
import { initialQuality, type QualityState } from '../../engine/quality.js';
import type { EventPlan } from '../plan.js';
import type { RunReport } from '../report.js';
import type { ServiceLimits } from './limits.js';
import { PointStore, RecentTimes } from './point-store.js';
import type { Judgement, RunDetail } from './view.js';

/** A point accepted and waiting for its commit: already in the journal's row shape. */
export interface StagedPoint {
  readonly trackId: number;
  readonly seq: number;
  readonly t: number;
  readonly values: Float64Array;
}

export interface DetailExtras {
  readonly smoothed: number[][];
  readonly judged: boolean[];
  readonly projection?: RunDetail['projection'];
  readonly scores?: { sims: [number[], number[]]; eigenvalues: [number, number] };
  readonly reference: { l2: number[]; score: number[]; residual: number[] };
}

export interface TrackState {
  readonly id: number;
  readonly key: string;
  readonly vignette: string;
  readonly track: string;
  readonly source: 'live' | 'sim';
  /** For each value position of the producer's messages, the plan channel index. */
  readonly order: number[];
  readonly openedAt: number;
  closedAt?: number;
  lastSeq?: number;
  /** Committed points, in compact columns (./point-store.ts). */
  readonly points: PointStore;
  /** Committed times still within the reorder tolerance of the latest (for the duplicate-time check). */
  readonly times: RecentTimes;
  readonly pending: Map<number, StagedPoint>;
  readonly pendingTimes: Set<number>;
  committedSeq: number;
  maxT: number;
  // judgement
  judgement?: Judgement;
  notJudged?: string;
  report?: RunReport;
  /** The simulated runs' own p-value triples in the run's window (engine/calibrate.ts), for combining. */
  nullPValues?: PerStatistic<number[]>;
  detail?: DetailExtras;
  trail: Array<[number, number, number]>;
  lastProvisionalT: number;
  readonly flags: string[];
  notes: number;
  /** Data-quality monitor of a live run (engine/quality.ts), fed in arrival order. */
  quality?: QualityState;
}

/** Stored with each final judgement so a restart restores it exactly. */
export interface StoredResult {
  readonly judgement: Judgement;
  readonly report: RunReport;
  readonly nullPValues?: PerStatistic<number[]>;
  readonly detail?: DetailExtras;
  readonly trail: Array<[number, number, number]>;
  readonly notJudged?: string;
}

export const keyOf = (vignette: string, track: string): string => `${vignette}/${track}`;

export function newTrack(plan: EventPlan, limits: ServiceLimits, id: number, vignette: string, track: string, source: 'live' | 'sim', order: number[], openedAt: number): TrackState {
  return {
    id, key: keyOf(vignette, track), vignette, track, source, order, openedAt,
    points: new PointStore(plan.channels.length), times: new RecentTimes(limits.timeReversalTolerance), pending: new Map(), pendingTimes: new Set(),
    committedSeq: 0, maxT: 0, trail: [], lastProvisionalT: Number.NEGATIVE_INFINITY, flags: [], notes: 0,
    quality: source === 'live' ? initialQuality({ channels: plan.channels, gapFactor: plan.analysis.gapFactor, reorderTolerance: limits.timeReversalTolerance }) : undefined,
  };
}

export function advanceCommitted(t: TrackState): void {
  while (t.points.has(t.committedSeq + 1)) t.committedSeq++;
}

/** The committed points as a track the engine takes: sorted by time, circular channels unwrapped. */
export function rawTrack(plan: EventPlan, t: TrackState, unwrap = true): RawTrack {
  const cols = t.points.columns();
  const values = plan.channels.map((c, ci) => (unwrap && c.period ? unwrapCircular(cols.values[ci], c.period) : cols.values[ci]));
  return { vignette: t.vignette, track: t.track, t: cols.t, values };
}
