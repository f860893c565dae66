/**
 * The output side of the DIS source: where its runs go. Two implementations share one track
 * bookkeeping (`TrackOutbox`) and differ only in how a producer message reaches the service:
 *
 *   FeedClient (feed-client.ts)     the feed protocol over WebSocket (`plumbline dis-bridge`)
 *   SubmitOutput (submit-output.ts) `RunningServer.submit` in the service process (`serve --dis`)
 *
 * Points wait in the track's buffer until the service acknowledges them (committedSeq); they go out
 * in messages of at most `batch` points, at most `window` messages unacknowledged. A track's close
 * goes out once every point up to its last is committed.
 */
import type { ClientMessage, ServerReply } from '../service/protocol.js';

/** What the bridge needs of its output; bridge.ts knows nothing more. */
export interface RunOutput {
  /** Start a track (a run). */
  open(vignette: string, track: string, source: 'live' | 'sim'): void;
  /** Add a point (its time strictly after the track's previous point); returns its sequence number (0: refused). */
  add(vignette: string, track: string, t: number, values: number[]): number;
  /** Ask to close a track once all its points are committed. */
  close(vignette: string, track: string): void;
  /** Send what can be sent now. */
  pump(): void;
  /** Wait (at most `timeoutMs`) until every requested close is confirmed; true when all are. */
  drain(timeoutMs?: number): Promise<boolean>;
  /** Release the connection (nothing more is sent). */
  stop(): void;
  /** Refusals by code: the service's error replies, and BUFFER_FULL. */
  readonly errors: ReadonlyMap<string, number>;
}

export interface OutboxOptions {
  /** Channel names in the order of the values of each point. */
  readonly channels: readonly string[];
  /** Most points per message. */
  readonly batch?: number;
  /** Most messages unacknowledged. */
  readonly window?: number;
  /** Most points a track holds unacknowledged; later points are refused and counted as BUFFER_FULL. */
  readonly maxBuffered?: number;
  readonly onEvent?: (line: string) => void;
  /** Called when the service confirms a close, or says at open that the track is already closed. */
  readonly onClosed?: (vignette: string, track: string, alreadyClosed: boolean) => void;
}

/** Default of `maxBuffered`: about 28 h of one entity at 2 Hz. */
export const DEFAULT_MAX_BUFFERED = 200_000;
/** Defaults of `batch` and `window`. */
export const OUTBOX_DEFAULTS = { batch: 500, window: 64 } as const;

interface TrackOut {
  readonly vignette: string;
  readonly track: string;
  readonly source: 'live' | 'sim';
  /** Points not yet committed, seq ascending. */
  buffer: Array<{ seq: number; t: number; values: number[] }>;
  lastSeq: number;
  sentUpTo: number;
  committed: number;
  opened: boolean;
  closeRequested: boolean;
  closeSent: boolean;
  closed: boolean;
}

const key = (v: string, t: string) => `${v}/${t}`;

/**
 * Track bookkeeping of a streaming producer (feed protocol v1). Subclasses give `transmit`, which
 * hands one message to the service (false: not connected, try later) and routes the service's
 * replies to `onReply`.
 */
export abstract class TrackOutbox implements RunOutput {
  private readonly tracks = new Map<string, TrackOut>();
  private inFlight = 0;
  private msgSeq = 0;
  private readonly batch: number;
  private readonly window: number;
  readonly errors = new Map<string, number>();

  constructor(protected readonly outbox: OutboxOptions) {
    this.batch = outbox.batch ?? OUTBOX_DEFAULTS.batch;
    this.window = outbox.window ?? OUTBOX_DEFAULTS.window;
  }

  /** Hand one message to the service; false when it cannot be sent now. */
  protected abstract transmit(message: ClientMessage): boolean;
  abstract stop(): void;

  protected say(line: string): void {
    this.outbox.onEvent?.(line);
  }

  protected count(code: string): void {
    this.errors.set(code, (this.errors.get(code) ?? 0) + 1);
  }

  /** A new connection: nothing is in flight; open every unfinished track again, resending from its committed point. */
  protected reopenAll(): void {
    this.inFlight = 0;
    for (const o of this.tracks.values()) {
      if (o.closed) continue;
      o.opened = false;
      o.closeSent = false;
      o.sentUpTo = o.committed;
      this.sendOpen(o);
    }
  }

  protected onReply(r: ServerReply): void {
    if (r.type === 'opened' || r.type === 'ack' || r.type === 'closed') {
      const o = this.tracks.get(key(r.vignette, r.track));
      if (o && r.type === 'opened') {
        o.opened = true;
        this.commit(o, r.committedSeq);
        o.sentUpTo = Math.max(o.sentUpTo, o.committed);
        if (r.closed && !o.closed) {
          o.closed = true;
          o.buffer = [];
          this.outbox.onClosed?.(o.vignette, o.track, true);
        }
      } else if (o && r.type === 'ack') {
        this.commit(o, r.committedSeq);
      } else if (o && r.type === 'closed' && !o.closed) {
        o.closed = true;
        // a closed track is done: forget it (the bridge names each run once)
        this.tracks.delete(key(o.vignette, o.track));
        this.outbox.onClosed?.(o.vignette, o.track, false);
      }
    } else if (r.type === 'error') {
      this.count(r.code);
      this.say(`service: ${r.code}: ${r.reason}`);
    }
    if (r.type !== 'opened' && this.inFlight > 0) this.inFlight--;
    this.pump();
  }

  private commit(o: TrackOut, committedSeq: number): void {
    o.committed = Math.max(o.committed, committedSeq);
    let drop = 0;
    while (drop < o.buffer.length && o.buffer[drop].seq <= o.committed) drop++;
    if (drop > 0) o.buffer.splice(0, drop);
  }

  private send(body: DistributiveOmit<ClientMessage, 'v' | 'id'>, counts = true): boolean {
    const sent = this.transmit({ v: 1, id: `d${++this.msgSeq}`, ...body } as ClientMessage);
    if (sent && counts) this.inFlight++;
    return sent;
  }

  private sendOpen(o: TrackOut): void {
    this.send({ type: 'open', vignette: o.vignette, track: o.track, source: o.source, channels: [...this.outbox.channels] }, false);
  }

  open(vignette: string, track: string, source: 'live' | 'sim' = 'live'): void {
    const k = key(vignette, track);
    if (this.tracks.has(k)) return;
    const o: TrackOut = { vignette, track, source, buffer: [], lastSeq: 0, sentUpTo: 0, committed: 0, opened: false, closeRequested: false, closeSent: false, closed: false };
    this.tracks.set(k, o);
    this.sendOpen(o);
  }

  add(vignette: string, track: string, t: number, values: number[]): number {
    const o = this.tracks.get(key(vignette, track));
    if (!o || o.closeRequested || o.closed) return 0;
    if (o.buffer.length >= (this.outbox.maxBuffered ?? DEFAULT_MAX_BUFFERED)) {
      this.count('BUFFER_FULL');
      return 0;
    }
    o.lastSeq++;
    o.buffer.push({ seq: o.lastSeq, t, values });
    return o.lastSeq;
  }

  close(vignette: string, track: string): void {
    const o = this.tracks.get(key(vignette, track));
    if (o) o.closeRequested = true;
    this.pump();
  }

  pump(): void {
    for (const o of this.tracks.values()) {
      if (!o.opened || o.closed) continue;
      while (o.sentUpTo < o.lastSeq && this.inFlight < this.window) {
        const from = o.buffer.findIndex((p) => p.seq > o.sentUpTo);
        if (from < 0) break;
        const points = o.buffer.slice(from, from + this.batch);
        if (!this.send({ type: 'points', vignette: o.vignette, track: o.track, points })) return;
        o.sentUpTo = points[points.length - 1].seq;
      }
      if (o.closeRequested && !o.closeSent && o.committed >= o.lastSeq) {
        o.closeSent = this.send({ type: 'close', vignette: o.vignette, track: o.track, lastSeq: o.lastSeq });
      }
    }
  }

  /** Tracks whose close the service has not confirmed yet. */
  pendingCloses(): number {
    let n = 0;
    for (const o of this.tracks.values()) if (o.closeRequested && !o.closed) n++;
    return n;
  }

  async drain(timeoutMs = 10_000): Promise<boolean> {
    const until = Date.now() + timeoutMs;
    while (this.pendingCloses() > 0 && Date.now() < until) {
      this.pump();
      await new Promise((r) => setTimeout(r, 20));
    }
    return this.pendingCloses() === 0;
  }
}

/** Omit over each member of a union. */
type DistributiveOmit<T, K extends PropertyKey> = T extends unknown ? Omit<T, K> : never;
