/**
 * A streaming producer of the feed protocol (v1, ingest/service/protocol.ts): tracks are opened,
 * points are added one at a time as they arrive, and a track is closed when its producer says so.
 *
 * Points wait in the track's buffer until the server acknowledges them (committedSeq); they are
 * sent in messages of at most `batch` points, at most `window` messages unacknowledged. After a
 * lost connection the client reconnects (bounded backoff), opens its tracks again and resends from
 * each track's committed sequence number, as `plumbline replay` does. A track's close goes out once
 * every point up to its last is committed.
 */
import WebSocket from 'ws';
import type { ServerReply } from '../service/protocol.js';

export interface FeedClientOptions {
  readonly url: string;
  readonly token?: string;
  /** Channel names in the order of the values of each point. */
  readonly channels: readonly string[];
  readonly batch?: number;
  readonly window?: number;
  readonly maxReconnects?: number;
  /** Most points a track holds unacknowledged (service unreachable); later points are refused and counted as BUFFER_FULL. */
  readonly maxBuffered?: number;
  readonly onEvent?: (line: string) => void;
  /** Called when the server confirms a close, or says at open that the track is already closed. */
  readonly onClosed?: (vignette: string, track: string, alreadyClosed: boolean) => void;
}

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

export class FeedClientError extends Error {
  constructor(readonly code: 'CONNECT_FAILED' | 'REFUSED', message: string) {
    super(message);
    this.name = 'FeedClientError';
  }
}

const key = (v: string, t: string) => `${v}/${t}`;
/** Default of `maxBuffered`: about 28 h of one entity at 2 Hz. */
export const DEFAULT_MAX_BUFFERED = 200_000;

export class FeedClient {
  private ws?: WebSocket;
  private readonly tracks = new Map<string, TrackOut>();
  private inFlight = 0;
  private msgSeq = 0;
  private stopped = false;
  private reconnecting?: Promise<void>;
  private readonly batch: number;
  private readonly window: number;
  /** Server error replies, by code. */
  readonly errors = new Map<string, number>();
  reconnects = 0;

  constructor(private readonly options: FeedClientOptions) {
    this.batch = options.batch ?? 500;
    this.window = options.window ?? 64;
  }

  private say(line: string): void {
    this.options.onEvent?.(line);
  }

  async connect(): Promise<void> {
    const max = this.options.maxReconnects ?? 20;
    for (let attempt = 0; ; attempt++) {
      try {
        const s = await new Promise<WebSocket>((res, rej) => {
          const w = new WebSocket(this.options.url, { headers: this.options.token ? { authorization: `Bearer ${this.options.token}` } : {} });
          w.once('open', () => res(w));
          w.once('error', rej);
          w.once('unexpected-response', (_req, resp) => rej(new FeedClientError('REFUSED', `the service refused the connection: ${resp.statusCode} ${resp.statusMessage ?? ''}`)));
        });
        this.attach(s);
        return;
      } catch (e) {
        if (e instanceof FeedClientError) throw e;
        if (attempt >= max || this.stopped) throw new FeedClientError('CONNECT_FAILED', `cannot reach ${this.options.url}: ${e instanceof Error ? e.message : String(e)}`);
        await new Promise((r) => setTimeout(r, Math.min(5000, 200 * 2 ** attempt)));
      }
    }
  }

  private attach(s: WebSocket): void {
    this.ws = s;
    this.inFlight = 0;
    s.on('message', (d) => {
      let r: ServerReply;
      try {
        r = JSON.parse(d.toString()) as ServerReply;
      } catch {
        this.count('BAD_REPLY');
        return;
      }
      this.onReply(r);
    });
    s.on('error', () => undefined);
    s.on('close', () => {
      if (this.ws !== s) return;
      this.ws = undefined;
      if (!this.stopped) this.reconnect();
    });
    for (const o of this.tracks.values()) {
      if (o.closed) continue;
      o.opened = false;
      o.closeSent = false;
      o.sentUpTo = o.committed;
      this.sendOpen(o);
    }
  }

  private reconnect(): void {
    if (this.reconnecting) return;
    this.reconnects++;
    this.say(`feed connection lost; reconnecting (${this.reconnects})`);
    this.reconnecting = this.connect()
      .catch((e: unknown) => this.say(`feed: ${e instanceof Error ? e.message : String(e)}`))
      .finally(() => {
        this.reconnecting = undefined;
      });
  }

  private count(code: string): void {
    this.errors.set(code, (this.errors.get(code) ?? 0) + 1);
  }

  private onReply(r: ServerReply): void {
    if (r.type === 'opened' || r.type === 'ack' || r.type === 'closed') {
      const o = this.tracks.get(key(r.vignette, r.track));
      if (o && r.type === 'opened') {
        o.opened = true;
        this.commit(o, r.committedSeq);
        o.sentUpTo = Math.max(o.sentUpTo, o.committed);
        if (r.closed && !o.closed) {
          o.closed = true;
          o.buffer = [];
          this.options.onClosed?.(o.vignette, o.track, true);
        }
      } else if (o && r.type === 'ack') {
        this.commit(o, r.committedSeq);
      } else if (o && r.type === 'closed' && !o.closed) {
        o.closed = true;
        // a closed track is done: forget it (the bridge names each run once)
        this.tracks.delete(key(o.vignette, o.track));
        this.options.onClosed?.(o.vignette, o.track, false);
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

  private send(body: Record<string, unknown>, counts = true): boolean {
    const ws = this.ws;
    if (!ws || ws.readyState !== WebSocket.OPEN) return false;
    ws.send(JSON.stringify({ v: 1, id: `d${++this.msgSeq}`, ...body }));
    if (counts) this.inFlight++;
    return true;
  }

  private sendOpen(o: TrackOut): void {
    this.send({ type: 'open', vignette: o.vignette, track: o.track, source: o.source, channels: this.options.channels }, false);
  }

  /** Start a track. */
  open(vignette: string, track: string, source: 'live' | 'sim' = 'live'): void {
    const k = key(vignette, track);
    if (this.tracks.has(k)) return;
    const o: TrackOut = { vignette, track, source, buffer: [], lastSeq: 0, sentUpTo: 0, committed: 0, opened: false, closeRequested: false, closeSent: false, closed: false };
    this.tracks.set(k, o);
    this.sendOpen(o);
  }

  /** Add a point (its time strictly after the track's previous point); returns its sequence number. */
  add(vignette: string, track: string, t: number, values: number[]): number {
    const o = this.tracks.get(key(vignette, track));
    if (!o || o.closeRequested || o.closed) return 0;
    if (o.buffer.length >= (this.options.maxBuffered ?? DEFAULT_MAX_BUFFERED)) {
      this.count('BUFFER_FULL');
      return 0;
    }
    o.lastSeq++;
    o.buffer.push({ seq: o.lastSeq, t, values });
    return o.lastSeq;
  }

  /** Ask to close a track once all its points are committed. */
  close(vignette: string, track: string): void {
    const o = this.tracks.get(key(vignette, track));
    if (o) o.closeRequested = true;
    this.pump();
  }

  /** Send what can be sent now (points of opened tracks within the window, due closes). */
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

  /** Tracks whose close the server has not confirmed yet. */
  pendingCloses(): number {
    let n = 0;
    for (const o of this.tracks.values()) if (o.closeRequested && !o.closed) n++;
    return n;
  }

  /** Wait (at most `timeoutMs`) until every requested close is confirmed. */
  async drain(timeoutMs = 10_000): Promise<boolean> {
    const until = Date.now() + timeoutMs;
    while (this.pendingCloses() > 0 && Date.now() < until) {
      this.pump();
      await new Promise((r) => setTimeout(r, 20));
    }
    return this.pendingCloses() === 0;
  }

  stop(): void {
    this.stopped = true;
    this.ws?.close();
    this.ws = undefined;
  }
}
