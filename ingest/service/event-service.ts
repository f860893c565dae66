/**
 * The live event's core, as one facade over its stages. The socket layer (./server.ts) and
 * in-process sources (./source.ts) feed it validated messages; it answers with replies and
 * announces what changed on `changes$`.
 *
 *   receive(role, message, reply) → route by type:
 *     open   → acceptance.resolveOpen → journal the track (new) → reply
 *     points → acceptance.stagePoints (refusals replied at once, with codes) → staged
 *     close  → staged until the batch is committed
 *     note   → event log → reply
 *   flush() → commit.commitBatch (one journal transaction, then the points enter their tracks,
 *             the quality monitor sees them, acks) → judging (provisional) → the batch's closes
 *             (journaled, then judging: final judgement, or the simulated track to the worker)
 *   judging → evidence book → views (snapshot, detail, exportReport) ; restore rebuilds it all.
 *
 * A rejected point never touches what was accepted before it; an acknowledged point is journaled.
 */
import { Subject } from 'rxjs';
import type { RawTrack } from '../../engine/types.js';
import type { EventPlan } from '../plan.js';
import type { AssessmentReport } from '../report.js';
import type { ReadReport } from '../tracks-reader.js';
import { refuseMessage, resolveOpen, stagePoints } from './acceptance.js';
import type { Assessor } from './assessor.js';
import { commitBatch, JournalFaults, type StagedAck, type StagedClose } from './commit.js';
import { EventLog } from './event-log.js';
import type { Change, EventCore, Role, VignetteState } from './event-state.js';
import * as views from './event-views.js';
import { EvidenceBook } from './evidence-book.js';
import type { Journal } from './journal.js';
import { Judging } from './judging.js';
import type { ServiceLimits } from './limits.js';
import { errorReply, type ClientMessage, type CloseMessage, type NoteMessage, type OpenMessage, type PointsMessage, type ServerReply } from './protocol.js';
import { observeQuality } from './quality-watch.js';
import { restoreEvent } from './restore.js';
import { keyOf, newTrack, type TrackState } from './tracks.js';
import type { EventView, JournalStatusView, RunDetail, RunView, VignetteView } from './view.js';

export type { Change, Role } from './event-state.js';

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

export class EventService {
  readonly changes$ = new Subject<Change>();
  private readonly core: EventCore;
  private readonly log: EventLog;
  private readonly book: EvidenceBook;
  private readonly faults: JournalFaults;
  private readonly judging: Judging;
  private readonly views: views.ViewSources;
  private staged: StagedAck[] = [];
  private closes: StagedClose[] = [];
  private baselineRead?: ReadReport;
  private closed = false;

  constructor(options: EventServiceOptions) {
    const clock = options.clock ?? Date.now;
    const vignettes = new Map<string, VignetteState>();
    for (const v of options.plan.vignettes) vignettes.set(v.id, { id: v.id, status: 'waiting', sims: 0 });
    this.core = { plan: options.plan, journal: options.journal, assessor: options.assessor, limits: options.limits, clock, changes$: this.changes$, tracks: new Map<string, TrackState>(), vignettes };
    this.baselineRead = options.baselineRead;
    this.log = new EventLog(options.journal, clock, options.limits, this.changes$);
    this.book = new EvidenceBook(this.core);
    this.faults = new JournalFaults(this.core, this.log);
    this.judging = new Judging(this.core, this.book, this.log, this.faults, options.refitDelayMs ?? 2000);
    this.views = { core: this.core, book: this.book, log: this.log, journalStatus: () => this.faults.status(), baselineRead: () => this.baselineRead };
  }

  // ---------------------------------------------------------------- start-up and restore

  /** Simulated tracks from a file at start: sent to the worker and fitted. */
  async loadBaseline(tracks: readonly RawTrack[], read?: ReadReport, options: { fit?: boolean } = {}): Promise<void> {
    if (read) this.baselineRead = read;
    const byVignette = new Map<string, RawTrack[]>();
    for (const t of tracks) byVignette.set(t.vignette, [...(byVignette.get(t.vignette) ?? []), t]);
    for (const [id, list] of byVignette) {
      const v = this.core.vignettes.get(id);
      if (!v) continue;
      v.sims = await this.core.assessor.addSims(id, list);
    }
    if (options.fit !== false) await Promise.all([...byVignette.keys()].map((id) => this.judging.refit(id)));
  }

  /** Rebuild the state from the journal (./restore.ts); refits and re-judges what needs it. */
  restore(onProgress?: (label: string, done: number, total: number) => void, note: (line: string) => void = () => undefined): Promise<{ tracks: number; points: number }> {
    return restoreEvent(this.core, { book: this.book, log: this.log, judging: this.judging }, onProgress, note);
  }

  // ---------------------------------------------------------------- messages

  /**
   * Handle one validated message from a connection. Replies that can be given at once are sent
   * through `reply`; acknowledgements of points wait for `flush`.
   */
  receive(role: Role, msg: ClientMessage, reply: (r: ServerReply) => void): void {
    try {
      this.route(role, msg, reply);
    } catch (e) {
      const failure = this.faults.failed(e);
      if (!failure) throw e;
      reply(errorReply('JOURNAL_UNAVAILABLE', `${failure}; nothing of this message was committed: send it again once the journal recovers`, msg.id));
    }
  }

  private route(role: Role, msg: ClientMessage, reply: (r: ServerReply) => void): void {
    if (this.closed) return reply(errorReply('INTERNAL', 'the service is shutting down', msg.id));
    if (msg.type === 'ping') return reply({ v: 1, type: 'pong', id: msg.id });
    if (role === 'watcher' && msg.type !== 'note') {
      return reply(errorReply('NOT_PERMITTED', `a dashboard connection may only send notes, not "${msg.type}"`, msg.id));
    }
    switch (msg.type) {
      case 'open':
        return reply(this.open(msg));
      case 'points':
        return this.stage(msg, reply);
      case 'close':
        this.closes.push({ msg, reply });
        return;
      case 'note':
        return reply(this.note(msg, role));
    }
  }

  private open(msg: OpenMessage): ServerReply {
    const { core } = this;
    const key = keyOf(msg.vignette, msg.track);
    const decision = resolveOpen(core.plan, core.tracks.get(key), msg);
    if (decision.kind === 'reply') return decision.reply;
    const at = core.clock();
    const id = core.journal.addTrack(msg.vignette, msg.track, msg.source, msg.channels, at);
    const t = newTrack(core.plan, core.limits, id, msg.vignette, msg.track, msg.source, decision.order, at);
    core.tracks.set(key, t);
    if (msg.source === 'live') {
      this.log.append('event', msg.vignette, msg.track, 0, { text: `live run ${msg.track} opened` });
      this.changes$.next({ kind: 'run', key });
    }
    return { v: 1, type: 'opened', id: msg.id, vignette: msg.vignette, track: msg.track, committedSeq: 0, closed: false };
  }

  private stage(msg: PointsMessage, reply: (r: ServerReply) => void): void {
    const t = this.core.tracks.get(keyOf(msg.vignette, msg.track));
    const refused = refuseMessage(t, msg);
    if (refused || !t) return reply(refused as ServerReply);
    const { staged, rejected, duplicates } = stagePoints(this.core.plan, this.core.limits, t, msg);
    if (rejected.length > 0) {
      reply(errorReply(rejected[0].code, `${rejected.length} of ${msg.points.length} points refused; the others are accepted`, msg.id, rejected));
    }
    this.staged.push({ track: t, msgId: msg.id, staged, duplicates, reply });
  }

  private note(msg: NoteMessage, role: Role): ServerReply {
    if (msg.vignette !== undefined && !this.core.vignettes.has(msg.vignette)) {
      return errorReply('UNKNOWN_VIGNETTE', `vignette "${msg.vignette}" is not in the plan`, msg.id);
    }
    const entry = this.log.append('note', msg.vignette ?? null, msg.track ?? null, msg.t ?? null, { text: msg.text, author: msg.author ?? role });
    if (msg.vignette && msg.track) {
      const t = this.core.tracks.get(keyOf(msg.vignette, msg.track));
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
      const touched = commitBatch(this.core, this.faults, batch, closes, (b) => observeQuality(this.core, this.log, b.track, b.staged, true));
      if (!touched) return;
      for (const t of touched) {
        if (t.source === 'live') {
          this.changes$.next({ kind: 'progress', key: t.key });
          this.judging.maybeProvisional(t);
        }
      }
    }
    for (const c of closes) {
      try {
        c.reply(this.close(c.msg));
      } catch (e) {
        const failure = this.faults.failed(e);
        if (!failure) throw e;
        c.reply(errorReply('JOURNAL_UNAVAILABLE', `${failure}; the track was not closed: send close again once the journal recovers`, c.msg.id));
      }
    }
  }

  private close(msg: CloseMessage): ServerReply {
    const t = this.core.tracks.get(keyOf(msg.vignette, msg.track));
    if (!t) return errorReply('TRACK_NOT_OPEN', `track ${keyOf(msg.vignette, msg.track)} was never opened`, msg.id);
    if (t.closedAt !== undefined) {
      return { v: 1, type: 'closed', id: msg.id, vignette: t.vignette, track: t.track };
    }
    if (t.committedSeq < msg.lastSeq) {
      return errorReply('INCOMPLETE', `track ${t.key} has points 1..${t.committedSeq} committed; close says the last is ${msg.lastSeq}: send the missing points first`, msg.id);
    }
    const at = this.core.clock();
    this.core.journal.closeTrack(t.id, msg.lastSeq, at);
    t.closedAt = at;
    t.lastSeq = msg.lastSeq;
    this.judging.runClosed(t);
    return { v: 1, type: 'closed', id: msg.id, vignette: t.vignette, track: t.track };
  }

  // ---------------------------------------------------------------- views (./event-views.ts)

  journalStatus(): JournalStatusView {
    return this.faults.status();
  }

  exportReport(): AssessmentReport {
    return views.exportReport(this.views);
  }

  runView(key: string): RunView | undefined {
    return views.runView(this.views, key);
  }

  vignetteView(id: string): VignetteView | undefined {
    return views.vignetteView(this.views, id);
  }

  combinedEventView(): EventView['combined'] {
    return views.combinedEventView(this.views);
  }

  snapshot(): EventView {
    return views.snapshot(this.views);
  }

  detail(vignette: string, track: string): RunDetail | undefined {
    return views.detail(this.views, vignette, track);
  }

  // ---------------------------------------------------------------- life cycle

  /** Wait until no judgement or fit is pending (tests, export after a replay). */
  settle(timeoutMs = 60_000): Promise<void> {
    return this.judging.settle(timeoutMs);
  }

  shutdown(): void {
    this.closed = true;
    this.judging.shutdown();
    this.changes$.complete();
  }
}
