/**
 * The live event's state and its rules: which messages are accepted, what is journaled, when runs
 * are judged, and what dashboards see. The socket layer (./server.ts) feeds it validated messages;
 * it answers with replies and announces what changed on `changes$`.
 *
 * Flow of a `points` message: `receive` checks every point against the track (channels, time
 * reversal beyond the tolerance, duplicates) and stages the good ones; `flush` commits all staged
 * points of the batch in one SQLite transaction, only then moves them into the in-memory track and
 * acknowledges them with each track's contiguous committed sequence number. A rejected point never
 * touches what was accepted before it.
 */
import { Subject } from 'rxjs';
import type { PerStatistic } from '../../engine/calibrate.js';
import { combineStatistics, type StatisticsCombined } from '../../engine/combine-statistics.js';
import type { ChannelEnvelope } from '../../engine/envelope.js';
import { EVENT_LABEL, type ModelSummary } from '../../engine/event.js';
import type { RawTrack } from '../../engine/types.js';
import { unwrapCircular } from '../../engine/unwrap.js';
import { closeTrack as closeQuality, initialQuality, observePoint, type QualityFlag, type QualityPoint, type QualityState } from '../../engine/quality.js';
import type { EventPlan } from '../plan.js';
import { assembleReport, CAUTIONS, diagnosisRow, practicalRows, runReport, vignetteVerdicts, type AssessmentReport, type RunReport } from '../report.js';
import type { ReadReport } from '../tracks-reader.js';
import type { Assessor } from './assessor.js';
import type { AssessResult, EvidenceResult } from './compute.js';
import { PointStore, RecentTimes } from './point-store.js';
import { journalWriteFailure, type Journal, type JournalLogEntry, type JournalPoint, type SimPack } from './journal.js';
import { packTrack, unpackTrack } from './fit-cache.js';
import type { ServiceLimits } from './limits.js';
import { errorReply, type ClientMessage, type CloseMessage, type ErrorCode, type NoteMessage, type OpenMessage, type PointsMessage, type ServerReply } from './protocol.js';
import { envelopeView, type CombinedView, type EventView, type JournalStatusView, type Judgement, type LogEntryView, type RunDetail, type RunView, type TimelinePoint, type VignetteView } from './view.js';

export type Role = 'producer' | 'watcher';

export type Change =
  | { readonly kind: 'run'; readonly key: string }
  /** Only new committed points of a run (its count and latest time changed, nothing else). */
  | { readonly kind: 'progress'; readonly key: string }
  | { readonly kind: 'vignette'; readonly id: string }
  | { readonly kind: 'combined' }
  | { readonly kind: 'log'; readonly entry: LogEntryView }
  | { readonly kind: 'journal' };

/** A point accepted and waiting for its commit: already in the journal's row shape. */
interface StagedPoint {
  readonly trackId: number;
  readonly seq: number;
  readonly t: number;
  readonly values: Float64Array;
}

interface TrackState {
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

interface DetailExtras {
  readonly smoothed: number[][];
  readonly judged: boolean[];
  readonly projection?: RunDetail['projection'];
  readonly scores?: { sims: [number[], number[]]; eigenvalues: [number, number] };
  readonly reference: { l2: number[]; score: number[]; residual: number[] };
}

interface VignetteState {
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

interface StagedClose {
  readonly msg: CloseMessage;
  readonly reply: (r: ServerReply) => void;
}

interface StagedAck {
  readonly track: TrackState;
  readonly msgId: string;
  readonly staged: StagedPoint[];
  readonly duplicates: number;
  readonly reply: (r: ServerReply) => void;
}

/** Stored with each final judgement so a restart restores it exactly. */
interface StoredResult {
  readonly judgement: Judgement;
  readonly report: RunReport;
  readonly nullPValues?: PerStatistic<number[]>;
  readonly detail?: DetailExtras;
  readonly trail: Array<[number, number, number]>;
  readonly notJudged?: string;
}

export interface EventServiceOptions {
  readonly plan: EventPlan;
  readonly journal: Journal;
  readonly assessor: Assessor;
  readonly limits: ServiceLimits;
  readonly clock?: () => number;
  /** Seconds between baseline refits of a vignette while simulated tracks stream in. */
  readonly refitDelayMs?: number;
  readonly baselineRead?: ReadReport;
}

const keyOf = (vignette: string, track: string): string => `${vignette}/${track}`;

const EVIDENCE_NOTE =
  'anytime-valid: the evidence (a test martingale) may be read after every run and runs may be added at will; reaching 1/alpha establishes a discrepancy with false-alarm probability at most alpha (Ville). The shared baseline makes runs of one vignette slightly dependent, so the bound is approximate.';

export class EventService {
  readonly changes$ = new Subject<Change>();
  private readonly plan: EventPlan;
  private readonly journal: Journal;
  private readonly assessor: Assessor;
  private readonly limits: ServiceLimits;
  private readonly clock: () => number;
  private readonly refitDelayMs: number;
  private readonly tracks = new Map<string, TrackState>();
  private readonly vignettes = new Map<string, VignetteState>();
  private readonly log: LogEntryView[] = [];
  private readonly timeline: TimelinePoint[] = [];
  /** Combinations computed since the last final judgement, by family and runs (see `combine`). */
  private readonly combinations = new Map<string, StatisticsCombined | undefined>();
  /** Judged live runs in the order their final judgement arrived (journal order on restore). */
  private readonly completionOrder: TrackState[] = [];
  private evidence?: EvidenceResult;
  private staged: StagedAck[] = [];
  private closes: StagedClose[] = [];
  private readonly inflight = new Set<Promise<unknown>>();
  private baselineRead?: ReadReport;
  private closed = false;
  /** Set while the journal refuses writes (disk full, read-only); cleared by the next successful commit. */
  private journalFault?: { reason: string; since: number };

  constructor(options: EventServiceOptions) {
    this.plan = options.plan;
    this.journal = options.journal;
    this.assessor = options.assessor;
    this.limits = options.limits;
    this.clock = options.clock ?? Date.now;
    this.refitDelayMs = options.refitDelayMs ?? 2000;
    this.baselineRead = options.baselineRead;
    for (const v of this.plan.vignettes) this.vignettes.set(v.id, { id: v.id, status: 'waiting', sims: 0 });
  }

  // ---------------------------------------------------------------- start-up and restore

  /** Simulated tracks from a file at start: sent to the worker and fitted. */
  async loadBaseline(tracks: readonly RawTrack[], read?: ReadReport, options: { fit?: boolean } = {}): Promise<void> {
    if (read) this.baselineRead = read;
    const byVignette = new Map<string, RawTrack[]>();
    for (const t of tracks) byVignette.set(t.vignette, [...(byVignette.get(t.vignette) ?? []), t]);
    for (const [id, list] of byVignette) {
      const v = this.vignettes.get(id);
      if (!v) continue;
      v.sims = await this.assessor.addSims(id, list);
    }
    if (options.fit !== false) await Promise.all([...byVignette.keys()].map((id) => this.refit(id)));
  }

  /**
   * Rebuild the state from the journal (tracks, points, results, log); refits and re-judges what
   * needs it. Closed simulated tracks are read from their packs (./fit-cache.ts, one row per track)
   * when a valid one exists, else point by point (and packed for the next start); the service keeps
   * none of their points, as after a close. `note` gets a line for every pack found damaged or not written.
   */
  async restore(onProgress?: (label: string, done: number, total: number) => void, note: (line: string) => void = () => undefined): Promise<{ tracks: number; points: number }> {
    const rows = this.journal.tracks();
    const byId = new Map<number, TrackState>();
    for (const r of rows) {
      const order = r.channels.map((c) => this.plan.channels.findIndex((p) => p.name === c));
      const t = this.newTrack(r.id, r.vignette, r.track, r.source, order, r.openedAt);
      if (r.closedAt !== null) {
        t.closedAt = r.closedAt;
        t.lastSeq = r.lastSeq ?? 0;
      }
      this.tracks.set(t.key, t);
      byId.set(r.id, t);
    }
    let points = 0;
    const packed = new Map<number, RawTrack>();
    const packs = this.journal.simPacks();
    for (const t of byId.values()) {
      const p = packs.get(t.id);
      if (!p || t.source !== 'sim' || t.closedAt === undefined || p.lastSeq !== t.lastSeq) continue;
      const raw = unpackTrack(p, t.vignette, t.track, this.plan.channels.length);
      if (typeof raw === 'string') {
        note(`${raw}; reading its points`);
        continue;
      }
      packed.set(t.id, raw);
      t.committedSeq = p.committedSeq;
      t.maxT = raw.t[raw.t.length - 1] ?? 0;
      points += p.n;
    }
    this.journal.eachPoint((p) => {
      const t = byId.get(p.trackId);
      if (!t) return;
      t.points.set(p.seq, { seq: p.seq, t: p.t, values: p.values });
      t.times.add(p.t);
      if (p.t > t.maxT) t.maxT = p.t;
      points++;
    }, new Set(packed.keys()));
    for (const t of this.tracks.values()) {
      if (!packed.has(t.id)) this.advanceCommitted(t);
      if (t.quality && t.closedAt === undefined) this.observeQuality(t, [...t.points.values()].sort((a, b) => a.seq - b.seq), false);
    }
    // Closed simulated tracks go to the worker (the service keeps only their count); those read
    // point by point are packed for the next start.
    const simsBy = new Map<string, RawTrack[]>();
    const fresh: SimPack[] = [];
    for (const t of this.tracks.values()) {
      if (t.source !== 'sim' || t.closedAt === undefined) continue;
      let raw = packed.get(t.id);
      if (!raw) {
        raw = this.rawTrack(t);
        fresh.push(packTrack(t.id, t.lastSeq ?? 0, t.committedSeq, raw));
        t.points.clear();
        t.times.clear();
      }
      const list = simsBy.get(t.vignette);
      if (list) list.push(raw);
      else simsBy.set(t.vignette, [raw]);
    }
    packed.clear();
    try {
      this.journal.saveSimPacks(fresh);
    } catch (e) {
      note(`simulated tracks not packed: ${journalWriteFailure(e) ?? (e instanceof Error ? e.message : String(e))}; the next start reads their points`);
    }
    const results = this.journal.results();
    for (const t of this.tracks.values()) {
      const stored = results.get(t.id) as StoredResult | undefined;
      if (stored) {
        t.judgement = stored.judgement;
        t.report = stored.report;
        t.nullPValues = stored.nullPValues;
        t.detail = stored.detail;
        t.trail = stored.trail;
        t.notJudged = stored.notJudged;
      }
    }
    const judged = [...this.tracks.values()].filter((t) => t.source === 'live' && t.report?.overall && t.closedAt !== undefined).sort((a, b) => (a.closedAt as number) - (b.closedAt as number) || a.id - b.id);
    for (const t of judged) this.addTimelinePoint(t, t.closedAt as number);
    for (const e of this.journal.log()) {
      const entry = this.logView(e);
      this.pushLog(entry, false);
      const t = entry.vignette && entry.track ? this.tracks.get(keyOf(entry.vignette, entry.track)) : undefined;
      const kind = entry.kind === 'flag' ? entry.text.split(/[ :(]/)[0] : undefined;
      if (t && kind && !t.flags.includes(kind)) t.flags.push(kind);
    }
    for (const t of this.tracks.values()) if (t.source === 'live') t.notes = this.log.filter((e) => e.kind === 'note' && e.vignette === t.vignette && e.track === t.track).length;
    for (const [id, list] of simsBy) {
      const v = this.vignettes.get(id);
      if (v) v.sims = await this.assessor.addSims(id, list);
    }
    // Every vignette with simulated tracks (from the journal or a baseline file) is fitted once.
    const withSims = [...this.vignettes.values()].filter((v) => v.sims > 0);
    let fitted = 0;
    await Promise.all(
      withSims.map((v) =>
        this.refit(v.id).then(() => {
          fitted++;
          onProgress?.('fitting baselines', fitted, withSims.length);
        }),
      ),
    );
    this.refreshEvidence();
    // Live runs closed but never judged (a stop between close and result) are judged now.
    for (const t of this.tracks.values()) {
      if (t.source === 'live' && t.closedAt !== undefined && !t.report) this.judgeFinal(t);
    }
    return { tracks: rows.length, points };
  }

  /** Pack a closed simulated track for the next start; a failure only means that start reads its points. */
  private packSim(t: TrackState, raw: RawTrack): void {
    try {
      this.journal.saveSimPacks([packTrack(t.id, t.lastSeq ?? 0, t.committedSeq, raw)]);
    } catch {
      // the points are committed; the pack is derived from them
    }
  }

  // ---------------------------------------------------------------- messages

  /**
   * Handle one validated message from a connection. Replies that can be given at once are sent
   * through `reply`; acknowledgements of points wait for `flush`.
   */
  receive(role: Role, msg: ClientMessage, reply: (r: ServerReply) => void): void {
    try {
      this.receiveOne(role, msg, reply);
    } catch (e) {
      const failure = this.journalFailed(e);
      if (!failure) throw e;
      reply(errorReply('JOURNAL_UNAVAILABLE', `${failure}; nothing of this message was committed: send it again once the journal recovers`, msg.id));
    }
  }

  private receiveOne(role: Role, msg: ClientMessage, reply: (r: ServerReply) => void): void {
    if (this.closed) return reply(errorReply('INTERNAL', 'the service is shutting down', msg.id));
    if (msg.type === 'ping') return reply({ v: 1, type: 'pong', id: msg.id });
    if (role === 'watcher' && msg.type !== 'note') {
      return reply(errorReply('NOT_PERMITTED', `a dashboard connection may only send notes, not "${msg.type}"`, msg.id));
    }
    switch (msg.type) {
      case 'open':
        return reply(this.open(msg));
      case 'points':
        return this.stagePoints(msg, reply);
      case 'close':
        this.closes.push({ msg, reply });
        return;
      case 'note':
        return reply(this.note(msg, role));
    }
  }

  private open(msg: OpenMessage): ServerReply {
    const pv = this.plan.vignettes.find((v) => v.id === msg.vignette);
    if (!pv) return errorReply('UNKNOWN_VIGNETTE', `vignette "${msg.vignette}" is not in the plan (${this.plan.vignettes.map((v) => v.id).join(', ')})`, msg.id);
    const names = this.plan.channels.map((c) => c.name);
    const order = msg.channels.map((c) => names.indexOf(c));
    if (msg.channels.length !== names.length || order.some((i) => i < 0) || new Set(order).size !== order.length) {
      return errorReply('CHANNELS_MISMATCH', `channels [${msg.channels.join(', ')}] do not match the plan's [${names.join(', ')}]`, msg.id);
    }
    const key = keyOf(msg.vignette, msg.track);
    const existing = this.tracks.get(key);
    if (existing) {
      if (existing.source !== msg.source || existing.order.join() !== order.join()) {
        return errorReply('TRACK_CONFLICT', `track ${key} exists as a ${existing.source} track with channels [${existing.order.map((i) => names[i]).join(', ')}]`, msg.id);
      }
      return { v: 1, type: 'opened', id: msg.id, vignette: msg.vignette, track: msg.track, committedSeq: existing.committedSeq, closed: existing.closedAt !== undefined };
    }
    const at = this.clock();
    const id = this.journal.addTrack(msg.vignette, msg.track, msg.source, msg.channels, at);
    const t = this.newTrack(id, msg.vignette, msg.track, msg.source, order, at);
    this.tracks.set(key, t);
    if (msg.source === 'live') {
      this.appendLog('event', msg.vignette, msg.track, 0, { text: `live run ${msg.track} opened` });
      this.changes$.next({ kind: 'run', key });
    }
    return { v: 1, type: 'opened', id: msg.id, vignette: msg.vignette, track: msg.track, committedSeq: 0, closed: false };
  }

  private stagePoints(msg: PointsMessage, reply: (r: ServerReply) => void): void {
    const t = this.tracks.get(keyOf(msg.vignette, msg.track));
    if (!t) return reply(errorReply('TRACK_NOT_OPEN', `track ${keyOf(msg.vignette, msg.track)} was never opened; send "open" first`, msg.id));
    if (t.closedAt !== undefined) return reply(errorReply('TRACK_CLOSED', `track ${t.key} is closed`, msg.id));
    const horizon = this.plan.vignettes.find((v) => v.id === t.vignette)?.horizon ?? Number.POSITIVE_INFINITY;
    const C = this.plan.channels.length;
    const staged: StagedPoint[] = [];
    const rejected: Array<{ seq: number; code: ErrorCode; reason: string }> = [];
    let duplicates = 0;
    const reject = (seq: number, code: ErrorCode, reason: string) => rejected.push({ seq, code, reason });
    for (const p of msg.points) {
      const stored = t.points.indexOf(p.seq);
      const prior = stored >= 0 ? undefined : t.pending.get(p.seq);
      const values = new Float64Array(C);
      let bad: string | undefined;
      if (p.values.length !== C) {
        reject(p.seq, 'WRONG_VALUE_COUNT', `point ${p.seq} has ${p.values.length} values; the track has ${C} channels`);
        continue;
      }
      for (let i = 0; i < C; i++) {
        const x = p.values[i];
        if (!Number.isFinite(x)) bad = `value ${i} of point ${p.seq} is not finite`;
        values[t.order[i]] = x;
      }
      if (bad) {
        reject(p.seq, 'NOT_FINITE', bad);
        continue;
      }
      if (stored >= 0 || prior) {
        const same = prior ? prior.t === p.t && prior.values.every((x, i) => x === values[i]) : t.points.same(p.seq, p.t, values);
        if (same) duplicates++;
        else reject(p.seq, 'DUPLICATE_CONFLICT', `sequence number ${p.seq} was already accepted with other data (t = ${prior ? prior.t : t.points.tAt(stored)})`);
        continue;
      }
      if (p.t > horizon) {
        reject(p.seq, 'BEYOND_HORIZON', `t = ${p.t} s is beyond the ${horizon} s horizon of ${t.vignette}`);
        continue;
      }
      if (p.t < t.maxT - this.limits.timeReversalTolerance) {
        reject(p.seq, 'TIME_REVERSED', `t = ${p.t} s is ${(t.maxT - p.t).toFixed(3)} s before the latest point (t = ${t.maxT} s); the tolerance is ${this.limits.timeReversalTolerance} s`);
        continue;
      }
      if (t.times.has(p.t) || t.pendingTimes.has(p.t)) {
        reject(p.seq, 'DUPLICATE_TIME', `another point of ${t.key} has t = ${p.t} s`);
        continue;
      }
      const sp: StagedPoint = { trackId: t.id, seq: p.seq, t: p.t, values };
      t.pending.set(p.seq, sp);
      t.pendingTimes.add(p.t);
      if (p.t > t.maxT) t.maxT = p.t;
      staged.push(sp);
    }
    if (rejected.length > 0) {
      reply(errorReply(rejected[0].code, `${rejected.length} of ${msg.points.length} points refused; the others are accepted`, msg.id, rejected));
    }
    this.staged.push({ track: t, msgId: msg.id, staged, duplicates, reply });
  }

  private note(msg: NoteMessage, role: Role): ServerReply {
    if (msg.vignette !== undefined && !this.vignettes.has(msg.vignette)) {
      return errorReply('UNKNOWN_VIGNETTE', `vignette "${msg.vignette}" is not in the plan`, msg.id);
    }
    const entry = this.appendLog('note', msg.vignette ?? null, msg.track ?? null, msg.t ?? null, { text: msg.text, author: msg.author ?? role });
    if (msg.vignette && msg.track) {
      const t = this.tracks.get(keyOf(msg.vignette, msg.track));
      if (t) {
        t.notes++;
        this.changes$.next({ kind: 'run', key: t.key });
      }
    }
    return { v: 1, type: 'noted', id: msg.id, entry: entry.id };
  }

  /** Commit everything staged since the last flush, then acknowledge, then process closes. */
  flush(): void {
    const batch = this.staged;
    const closes = this.closes;
    this.staged = [];
    this.closes = [];
    if (batch.length > 0) {
      const all: JournalPoint[] = [];
      for (const b of batch) for (const p of b.staged) all.push(p);
      try {
        this.journal.commitPoints(all);
      } catch (e) {
        const failure = this.journalFailed(e);
        for (const b of batch) {
          for (const p of b.staged) {
            b.track.pending.delete(p.seq);
            b.track.pendingTimes.delete(p.t);
          }
          b.track.maxT = b.track.points.maxT;
          b.reply(
            failure
              ? errorReply('JOURNAL_UNAVAILABLE', `${failure}; these points were not committed: send them again once the journal recovers`, b.msgId)
              : errorReply('INTERNAL', `the journal could not commit: ${e instanceof Error ? e.message : String(e)}`, b.msgId),
          );
        }
        for (const c of closes) c.reply(errorReply(failure ? 'JOURNAL_UNAVAILABLE' : 'INTERNAL', `${failure ?? 'the journal could not commit'}; the track was not closed: send close again`, c.msg.id));
        return;
      }
      this.journalRecovered();
      const touched = new Set<TrackState>();
      for (const b of batch) {
        for (const p of b.staged) {
          b.track.pending.delete(p.seq);
          b.track.pendingTimes.delete(p.t);
          b.track.points.set(p.seq, p);
          b.track.times.add(p.t);
        }
        this.advanceCommitted(b.track);
        this.observeQuality(b.track, b.staged, true);
        touched.add(b.track);
      }
      for (const b of batch) {
        b.reply({ v: 1, type: 'ack', id: b.msgId, vignette: b.track.vignette, track: b.track.track, committedSeq: b.track.committedSeq, accepted: b.staged.length, duplicates: b.duplicates });
      }
      for (const t of touched) {
        if (t.source === 'live') {
          this.changes$.next({ kind: 'progress', key: t.key });
          this.maybeProvisional(t);
        }
      }
    }
    for (const c of closes) {
      try {
        c.reply(this.close(c.msg));
      } catch (e) {
        const failure = this.journalFailed(e);
        if (!failure) throw e;
        c.reply(errorReply('JOURNAL_UNAVAILABLE', `${failure}; the track was not closed: send close again once the journal recovers`, c.msg.id));
      }
    }
  }

  // ---------------------------------------------------------------- journal faults

  /** Record a journal write failure (returns its description), or undefined when `e` is not one. */
  private journalFailed(e: unknown): string | undefined {
    const failure = journalWriteFailure(e);
    if (failure && !this.journalFault) {
      this.journalFault = { reason: failure, since: this.clock() };
      this.changes$.next({ kind: 'journal' });
    }
    return failure;
  }

  private journalRecovered(): void {
    if (!this.journalFault) return;
    const was = this.journalFault;
    this.journalFault = undefined;
    this.changes$.next({ kind: 'journal' });
    try {
      this.appendLog('event', null, null, null, { text: `journal writable again after ${((this.clock() - was.since) / 1000).toFixed(1)} s (${was.reason}); data refused meanwhile must be sent again` });
    } catch {
      // failed again: the next commit reports it
    }
  }

  journalStatus(): JournalStatusView {
    return this.journalFault ? { writable: false, reason: this.journalFault.reason, since: this.journalFault.since } : { writable: true };
  }

  private close(msg: CloseMessage): ServerReply {
    const t = this.tracks.get(keyOf(msg.vignette, msg.track));
    if (!t) return errorReply('TRACK_NOT_OPEN', `track ${keyOf(msg.vignette, msg.track)} was never opened`, msg.id);
    if (t.closedAt !== undefined) {
      return { v: 1, type: 'closed', id: msg.id, vignette: t.vignette, track: t.track };
    }
    if (t.committedSeq < msg.lastSeq) {
      return errorReply('INCOMPLETE', `track ${t.key} has points 1..${t.committedSeq} committed; close says the last is ${msg.lastSeq}: send the missing points first`, msg.id);
    }
    const at = this.clock();
    this.journal.closeTrack(t.id, msg.lastSeq, at);
    t.closedAt = at;
    t.lastSeq = msg.lastSeq;
    if (t.source === 'sim') {
      const v = this.vignettes.get(t.vignette);
      const raw = this.rawTrack(t);
      this.packSim(t, raw);
      // The worker keeps simulated tracks; the service keeps only the count.
      t.points.clear();
      t.times.clear();
      this.track(this.assessor.addSims(t.vignette, [raw]).then((n) => {
        if (v) v.sims = n;
        this.scheduleRefit(t.vignette);
      }));
    } else {
      if (t.quality) {
        const horizon = this.plan.vignettes.find((v) => v.id === t.vignette)?.horizon ?? t.maxT;
        for (const f of closeQuality(t.quality, horizon)) this.raiseFlag(t, f);
      }
      this.appendLog('event', t.vignette, t.track, t.maxT, { text: `live run ${t.track} closed after ${t.points.size} points` });
      this.judgeFinal(t);
      this.changes$.next({ kind: 'run', key: t.key });
    }
    return { v: 1, type: 'closed', id: msg.id, vignette: t.vignette, track: t.track };
  }

  // ---------------------------------------------------------------- judgement

  private scheduleRefit(vignette: string): void {
    const v = this.vignettes.get(vignette);
    if (!v || v.fitTimer) return;
    v.fitTimer = setTimeout(() => {
      v.fitTimer = undefined;
      this.track(this.refit(vignette));
    }, this.refitDelayMs);
  }

  private async refit(vignette: string): Promise<void> {
    const v = this.vignettes.get(vignette);
    if (!v) return;
    v.status = 'fitting';
    this.changes$.next({ kind: 'vignette', id: vignette });
    const r = await this.assessor.fit(vignette);
    v.sims = r.sims;
    if (r.error || !r.summary) {
      v.status = r.sims === 0 ? 'waiting' : 'failed';
      v.reason = r.error;
      v.summary = undefined;
    } else {
      v.status = 'ready';
      v.reason = undefined;
      v.summary = r.summary;
      v.envelope = r.envelope;
      v.grid = r.grid ? Array.from(r.grid) : undefined;
      const M = v.grid?.length ?? 0;
      v.texture = r.texture?.map((c) => this.plan.channels.map((_, ci) => Array.from(c.subarray(ci * M, (ci + 1) * M))));
    }
    this.changes$.next({ kind: 'vignette', id: vignette });
    // Runs that waited for this baseline are judged now.
    for (const t of this.tracks.values()) {
      if (t.vignette !== vignette || t.source !== 'live') continue;
      if (t.closedAt !== undefined && !t.report) this.judgeFinal(t);
      else if (t.closedAt === undefined) {
        t.lastProvisionalT = Number.NEGATIVE_INFINITY;
        this.maybeProvisional(t);
      }
    }
  }

  private maybeProvisional(t: TrackState): void {
    const v = this.vignettes.get(t.vignette);
    if (v?.status !== 'ready' || t.closedAt !== undefined) return;
    if (t.maxT - t.lastProvisionalT < this.limits.provisionalEvery) return;
    t.lastProvisionalT = t.maxT;
    const raw = this.rawTrack(t);
    this.track(
      this.assessor.assess(t.vignette, raw, 'provisional').then((r) => {
        if (!r || t.closedAt !== undefined) return; // superseded, or the final judgement owns the run now
        this.applyResult(t, r);
      }),
    );
  }

  private judgeFinal(t: TrackState): void {
    const v = this.vignettes.get(t.vignette);
    if (v?.status !== 'ready') {
      t.notJudged = `waiting for the baseline of ${t.vignette}`;
      return;
    }
    const raw = this.rawTrack(t);
    this.track(
      this.assessor.assess(t.vignette, raw, 'final').then((r) => {
        if (!r) return;
        this.applyResult(t, r);
        const stored: StoredResult = { judgement: t.judgement as Judgement, report: t.report as RunReport, nullPValues: t.nullPValues, detail: t.detail, trail: t.trail, notJudged: t.notJudged };
        if (t.report) this.journal.saveResult(t.id, stored);
        this.addTimelinePoint(t, this.clock());
        this.refreshEvidence();
        this.changes$.next({ kind: 'combined' });
        // Holm's adjustment ties the vignettes' verdicts together: all of them may change.
        for (const id of this.vignettes.keys()) this.changes$.next({ kind: 'vignette', id });
      }),
    );
  }

  private applyResult(t: TrackState, r: AssessResult): void {
    const a = r.assessment;
    if (!a) {
      t.notJudged = r.error;
      if (r.mode === 'final') {
        t.report = runReport(this.plan, { vignette: t.vignette, track: t.track, samples: r.samples, error: r.error });
      }
      this.changes$.next({ kind: 'run', key: t.key });
      return;
    }
    const res = a.result;
    t.notJudged = undefined;
    t.judgement = {
      kind: r.mode,
      upTo: r.upTo,
      pValues: { ...res.pValues },
      statistics: { ...res.live },
      simsUsed: a.simsUsed,
      components: res.model.eigenvalues.length,
      // A run in flight is partial by nature and its early prefixes are short: those two window
      // flags say nothing while it flies, so only final judgements carry them.
      flags: r.mode === 'final' ? [...a.flags] : a.flags.filter((f) => f !== 'partial' && f !== 'few-samples'),
      rms: r.rms ?? [],
      practical: r.practical ? practicalRows(r.practical) : undefined,
      diagnosis: r.diagnosis ? diagnosisRow(r.diagnosis) : undefined,
    };
    if (r.scoreCloud) t.trail = [...t.trail, [r.upTo, r.scoreCloud.run[0], r.scoreCloud.run[1]]];
    const M = a.active.length;
    const C = this.plan.channels.length;
    const lastObserved = r.upTo;
    t.detail = {
      smoothed: Array.from({ length: C }, (_, c) => Array.from(a.curve.subarray(c * M, (c + 1) * M))),
      judged: Array.from(a.active, (x) => x === 1),
      projection: r.projection
        ? {
            from: lastObserved,
            level: r.projection.level,
            mean: Array.from({ length: C }, (_, c) => Array.from(r.projection!.mean.subarray(c * M, (c + 1) * M))),
            lower: Array.from({ length: C }, (_, c) => Array.from(r.projection!.lower.subarray(c * M, (c + 1) * M))),
            upper: Array.from({ length: C }, (_, c) => Array.from(r.projection!.upper.subarray(c * M, (c + 1) * M))),
          }
        : undefined,
      scores: r.scoreCloud ? { sims: r.scoreCloud.sims, eigenvalues: r.scoreCloud.eigenvalues } : undefined,
      reference: { l2: Array.from(res.reference.l2), score: Array.from(res.reference.score), residual: Array.from(res.reference.residual) },
    };
    if (r.mode === 'final') {
      t.report = runReport(this.plan, { vignette: t.vignette, track: t.track, samples: r.samples, assessment: a, rms: r.rms, practical: r.practical, diagnosis: r.diagnosis });
      t.nullPValues = { l2: Array.from(res.nullPValues.l2), score: Array.from(res.nullPValues.score), residual: Array.from(res.nullPValues.residual) };
      this.combinations.clear();
    }
    this.changes$.next({ kind: 'run', key: t.key });
  }

  /** Recompute the sequential evidence from every final run's p-values (per statistic and overall), in completion order. */
  private refreshEvidence(): void {
    const runs = this.completionOrder.flatMap((t) => {
      const r = t.report;
      if (!r?.overall || !r.statistics) return [];
      return [{ stream: t.vignette, p: r.overall.pValue, l2: r.statistics.l2.pValue, score: r.statistics.score.pValue, residual: r.statistics.residual.pValue }];
    });
    if (runs.length === 0) return;
    this.track(
      this.assessor.evidence(runs, this.plan.analysis.alpha).then((e) => {
        this.evidence = e;
        this.changes$.next({ kind: 'combined' });
        for (const id of this.vignettes.keys()) this.changes$.next({ kind: 'vignette', id });
      }),
    );
  }

  // ---------------------------------------------------------------- views

  private addTimelinePoint(t: TrackState, at: number): void {
    if (!t.report?.overall) return;
    this.completionOrder.push(t);
    const combined = this.combine(this.finalTracks().filter((x) => this.completionOrder.includes(x)), EVENT_LABEL);
    if (combined) {
      const b = combined.byStatistic;
      this.timeline.push({ at, run: t.key, runs: combined.count, pValue: combined.pValue, byStatistic: { l2: b.l2.pValue, score: b.score.pValue, residual: b.residual.pValue } });
    }
  }

  /** Live runs with a final judgement in the batch order (plan vignette order, then track id). */
  private finalTracks(): TrackState[] {
    const order = new Map(this.plan.vignettes.map((v, i) => [v.id, i]));
    return [...this.tracks.values()]
      .filter((t) => t.source === 'live' && t.report)
      .sort((a, b) => (order.get(a.vignette) ?? 0) - (order.get(b.vignette) ?? 0) || (a.track < b.track ? -1 : a.track > b.track ? 1 : 0));
  }

  /**
   * Each statistic combined across the judged runs and their calibrated minimum, as the batch path
   * computes it (engine/combine-statistics.ts); `label` is the family's name in the draws' seed.
   */
  private combine(tracks: readonly TrackState[], label: string): StatisticsCombined | undefined {
    // Views ask for the same combinations many times between two final judgements: keep them.
    const key = `${label}\u0000${tracks.map((t) => t.key).join('\u0001')}`;
    if (this.combinations.has(key)) return this.combinations.get(key);
    const runs = tracks.flatMap((t) => {
      const st = t.report?.statistics;
      if (!st || !t.nullPValues) return [];
      return [{ pValues: { l2: st.l2.pValue, score: st.score.pValue, residual: st.residual.pValue }, nullPValues: t.nullPValues }];
    });
    const a = this.plan.analysis;
    const out = runs.length > 0 ? combineStatistics(runs, a.combination, a.seed ?? 1, label) : undefined;
    if (this.combinations.size > 1000) this.combinations.clear();
    this.combinations.set(key, out);
    return out;
  }

  private combinedView(c: StatisticsCombined | undefined): CombinedView | undefined {
    return c
      ? {
          method: c.method,
          statistic: c.statistic,
          pValue: c.pValue,
          count: c.count,
          byStatistic: { l2: c.byStatistic.l2.pValue, score: c.byStatistic.score.pValue, residual: c.byStatistic.residual.pValue },
          leading: c.leading,
          note: `fixed-sample ${c.method} combination of each statistic, the smallest of the three calibrated by ${c.draws} Monte Carlo draws (seeded): valid only for a number of runs fixed in advance`,
        }
      : undefined;
  }

  exportReport(): AssessmentReport {
    const tracks = this.finalTracks();
    const reports = tracks.map((t) => t.report as RunReport);
    const vignettes = this.plan.vignettes.map((pv) => {
      const v = this.vignettes.get(pv.id) as VignetteState;
      return { id: pv.id, horizon: pv.horizon, summary: v.summary, error: v.reason, combined: this.combine(tracks.filter((t) => t.vignette === pv.id), pv.id) };
    });
    const e = this.evidence;
    const sequential = e
      ? {
          threshold: e.threshold,
          evidence: e.event.current,
          established: e.event.established,
          crossedAt: e.event.crossedAt,
          statistics: { l2: e.event.statistics.l2.current, score: e.event.statistics.score.current, residual: e.event.statistics.residual.current },
          vignettes: e.streams.filter((x) => x.runs > 0).map((x) => ({ id: x.vignette, evidence: x.current, established: x.established, runs: x.runs, advice: x.advice.message })),
          advice: e.eventAdvice.message,
          note: EVIDENCE_NOTE,
        }
      : undefined;
    const log = this.journal.log().map((e) => {
      const x = this.logView(e);
      return { at: x.at, kind: x.kind, vignette: x.vignette, track: x.track, t: x.t, text: x.text, author: x.author };
    });
    return assembleReport(this.plan, vignettes, reports, this.combine(tracks, EVENT_LABEL), { baseline: this.baselineRead }, { sequential, log });
  }

  runView(key: string): RunView | undefined {
    const t = this.tracks.get(key);
    if (!t) return undefined;
    return {
      key: t.key,
      vignette: t.vignette,
      track: t.track,
      source: t.source,
      status: t.closedAt === undefined ? 'in-flight' : 'complete',
      points: t.points.size,
      lastT: t.maxT,
      openedAt: t.openedAt,
      closedAt: t.closedAt,
      judgement: t.judgement,
      notJudged: t.notJudged,
      flags: t.flags,
      notes: t.notes,
    };
  }

  vignetteView(id: string): VignetteView | undefined {
    const v = this.vignettes.get(id);
    const pv = this.plan.vignettes.find((x) => x.id === id);
    if (!v || !pv) return undefined;
    const tracks = this.finalTracks();
    const verdict = vignetteVerdicts(
      this.plan.vignettes.map((x) => ({ id: x.id, combined: this.combine(tracks.filter((t) => t.vignette === x.id), x.id) })),
      this.plan.analysis.alpha,
    ).get(id);
    return {
      id,
      label: pv.label,
      horizon: pv.horizon,
      condition: pv.condition,
      baseline: { status: v.status, sims: v.sims, components: v.summary?.components, varianceExplained: v.summary?.varianceExplained, reason: v.reason },
      combined: this.combinedView(this.combine(tracks.filter((t) => t.vignette === id), id)),
      evidence: this.evidence?.streams.find((x) => x.vignette === id && x.runs > 0),
      adjustedPValue: verdict?.adjustedPValue,
      verdict: verdict?.verdict ?? 'not judged',
    };
  }

  combinedEventView(): EventView['combined'] {
    const c = this.combinedView(this.combine(this.finalTracks(), EVENT_LABEL));
    return c ? { ...c, alpha: this.plan.analysis.alpha, distinguishable: c.pValue <= this.plan.analysis.alpha } : undefined;
  }

  snapshot(): EventView {
    return {
      plan: { name: this.plan.name, alpha: this.plan.analysis.alpha, combination: this.plan.analysis.combination, channels: this.plan.channels.map((c) => ({ name: c.name, unit: c.unit })) },
      vignettes: this.plan.vignettes.map((v) => this.vignetteView(v.id) as VignetteView),
      runs: [...this.tracks.values()].filter((t) => t.source === 'live').map((t) => this.runView(t.key) as RunView),
      combined: this.combinedEventView(),
      timeline: this.timeline.map((p, i) => ({ ...p, evidence: this.evidence?.event.martingale[i] })),
      evidence: this.evidence ? { ...this.evidence, note: EVIDENCE_NOTE } : undefined,
      log: this.log.slice(-this.limits.logEntries),
      cautions: [...CAUTIONS],
      journal: this.journalStatus(),
    };
  }

  detail(vignette: string, track: string): RunDetail | undefined {
    const t = this.tracks.get(keyOf(vignette, track));
    const run = this.runView(keyOf(vignette, track));
    if (!t || !run) return undefined;
    // Circular channels unwrapped, as the smoothed curve and the envelope are.
    const raw = this.rawTrack(t);
    const v = this.vignettes.get(vignette);
    return {
      run,
      channels: this.plan.channels.map((c) => ({ name: c.name, unit: c.unit })),
      raw: { t: Array.from(raw.t), values: raw.values.map((x) => Array.from(x)) },
      grid: v?.grid,
      smoothed: t.detail?.smoothed,
      judged: t.detail?.judged,
      texture: v?.texture,
      envelope: v?.envelope ? envelopeView(v.envelope) : undefined,
      projection: t.closedAt === undefined ? t.detail?.projection : undefined,
      scores: t.detail?.scores ? { ...t.detail.scores, trail: t.trail } : undefined,
      reference: t.detail?.reference,
      log: this.log.filter((e) => e.vignette === vignette && (e.track === undefined || e.track === track)),
    };
  }

  // ---------------------------------------------------------------- helpers

  private newTrack(id: number, vignette: string, track: string, source: 'live' | 'sim', order: number[], openedAt: number): TrackState {
    return {
      id, key: keyOf(vignette, track), vignette, track, source, order, openedAt,
      points: new PointStore(this.plan.channels.length), times: new RecentTimes(this.limits.timeReversalTolerance), pending: new Map(), pendingTimes: new Set(),
      committedSeq: 0, maxT: 0, trail: [], lastProvisionalT: Number.NEGATIVE_INFINITY, flags: [], notes: 0,
      quality: source === 'live' ? initialQuality({ channels: this.plan.channels, gapFactor: this.plan.analysis.gapFactor, reorderTolerance: this.limits.timeReversalTolerance }) : undefined,
    };
  }

  /** Feed committed points to the run's quality monitor; `announce` journals and shows new flags. */
  private observeQuality(t: TrackState, points: ReadonlyArray<{ readonly seq: number; readonly t: number; readonly values: Float64Array }>, announce: boolean): void {
    if (!t.quality) return;
    for (const p of points) {
      // The monitor only reads `values` by index (engine/quality.ts): the point's own array serves.
      const r = observePoint(t.quality, p as unknown as QualityPoint);
      t.quality = r.state;
      if (announce) for (const f of r.flags) this.raiseFlag(t, f);
    }
  }

  private raiseFlag(t: TrackState, f: QualityFlag): void {
    if (!t.flags.includes(f.kind)) t.flags.push(f.kind);
    this.appendLog('flag', t.vignette, t.track, f.t, { text: `${f.kind}${f.channelName ? ` (${f.channelName})` : ''}: ${f.detail}` });
    this.changes$.next({ kind: 'run', key: t.key });
  }

  private advanceCommitted(t: TrackState): void {
    while (t.points.has(t.committedSeq + 1)) t.committedSeq++;
  }

  /** The committed points as a track the engine takes: sorted by time, circular channels unwrapped. */
  private rawTrack(t: TrackState, unwrap = true): RawTrack {
    const cols = t.points.columns();
    const values = this.plan.channels.map((c, ci) => (unwrap && c.period ? unwrapCircular(cols.values[ci], c.period) : cols.values[ci]));
    return { vignette: t.vignette, track: t.track, t: cols.t, values };
  }

  private appendLog(kind: LogEntryView['kind'], vignette: string | null, track: string | null, t: number | null, body: { text: string; author?: string }): LogEntryView {
    const at = this.clock();
    const id = this.journal.appendLog(at, kind, vignette, track, t, body);
    const entry: LogEntryView = { id, at, kind, vignette: vignette ?? undefined, track: track ?? undefined, t: t ?? undefined, text: body.text, author: body.author };
    this.pushLog(entry, true);
    return entry;
  }

  private pushLog(entry: LogEntryView, announce: boolean): void {
    this.log.push(entry);
    if (this.log.length > 4 * this.limits.logEntries) this.log.splice(0, this.log.length - this.limits.logEntries);
    if (announce) this.changes$.next({ kind: 'log', entry });
  }

  private logView(e: JournalLogEntry): LogEntryView {
    const body = e.body as { text?: string; author?: string };
    return { id: e.id, at: e.at, kind: e.kind as LogEntryView['kind'], vignette: e.vignette ?? undefined, track: e.track ?? undefined, t: e.t ?? undefined, text: body.text ?? '', author: body.author };
  }

  private track<T>(p: Promise<T>): void {
    const q = p.catch((e: unknown) => {
      if (this.closed || this.journalFailed(e)) return; // a journal fault is shown as such; results are recomputed after a restart
      try {
        this.appendLog('event', null, null, null, { text: `internal failure: ${e instanceof Error ? e.message : String(e)}` });
      } catch {
        // the journal failed too: never an unhandled rejection
      }
    });
    this.inflight.add(q);
    void q.finally(() => this.inflight.delete(q));
  }

  /** Wait until no judgement or fit is pending (tests, export after a replay). */
  async settle(timeoutMs = 60_000): Promise<void> {
    const until = Date.now() + timeoutMs;
    for (let i = 0; i < 10_000 && Date.now() < until; i++) {
      const timers = [...this.vignettes.values()].some((v) => v.fitTimer);
      if (this.inflight.size === 0 && !timers) return;
      await Promise.race([...this.inflight, new Promise((r) => setTimeout(r, 20))]);
    }
    throw new Error('settle: work still pending after the timeout');
  }

  shutdown(): void {
    this.closed = true;
    for (const v of this.vignettes.values()) if (v.fitTimer) clearTimeout(v.fitTimer);
    this.changes$.complete();
  }
}
