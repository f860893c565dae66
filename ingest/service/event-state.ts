/**
 * What every stage of the event core shares: the plan, the limits, the journal, the worker's
 * scheduler, the clock, the tracks and vignettes by key, and `changes$`, where a stage announces
 * what dashboards must be sent. The facade (./event-service.ts) builds it once; stages read and
 * update it and never hold another copy.
 */
import type { Subject } from 'rxjs';
import type { ChannelEnvelope } from '../../engine/envelope.js';
import type { ModelSummary } from '../../engine/event.js';
import type { EventPlan } from '../plan.js';
import type { Assessor } from './assessor.js';
import type { Journal } from './journal.js';
import type { ServiceLimits } from './limits.js';
import type { TrackState } from './tracks.js';
import type { LogEntryView, VignetteView } from './view.js';

export type Role = 'producer' | 'watcher';

export type Change =
  | { readonly kind: 'run'; readonly key: string }
  /** Only new committed points of a run (its count and latest time changed, nothing else). */
  | { readonly kind: 'progress'; readonly key: string }
  | { readonly kind: 'vignette'; readonly id: string }
  | { readonly kind: 'combined' }
  | { readonly kind: 'log'; readonly entry: LogEntryView }
  | { readonly kind: 'journal' };

export interface VignetteState {
  readonly id: string;
  status: VignetteView['baseline']['status'];
  sims: number;
  summary?: ModelSummary;
  envelope?: ChannelEnvelope[];
  grid?: number[];
  texture?: number[][][];
  reason?: string;
  fitTimer?: NodeJS.Timeout;
}

export interface EventCore {
  readonly plan: EventPlan;
  readonly journal: Journal;
  readonly assessor: Assessor;
  readonly limits: ServiceLimits;
  readonly clock: () => number;
  readonly changes$: Subject<Change>;
  readonly tracks: Map<string, TrackState>;
  readonly vignettes: Map<string, VignetteState>;
}
