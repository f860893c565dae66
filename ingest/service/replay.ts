/**
 * `plumbline replay`: send recorded tracks to a running server as a producer would.
 *
 * Simulated tracks (optional) go first, as fast as the server acknowledges them. Live runs follow
 * on the event clock: each run starts when a slot is free (`overlap` runs fly at once) and every
 * point is sent when its recorded time comes, scaled by `speed` (0 means as fast as possible).
 * Flow control: at most `window` messages wait for their acknowledgement. After a disconnect the
 * client reconnects (bounded backoff), opens its tracks again and resumes each from the server's
 * committed sequence number, so nothing is lost or sent twice into the journal.
 */
import WebSocket from 'ws';
import type { RawTrack } from '../../engine/types.js';
import type { EventPlan } from '../plan.js';
import type { ServerReply } from './protocol.js';

export interface ReplayOptions {
  /** ws://host:port/feed */
  readonly url: string;
  readonly token?: string;
  readonly plan: EventPlan;
  readonly live: readonly RawTrack[];
  readonly sims?: readonly RawTrack[];
  readonly speed?: number;
  readonly overlap?: number;
  /** Points per message for simulated tracks and catch-up. */
  readonly batch?: number;
  readonly window?: number;
  readonly maxReconnects?: number;
  readonly onEvent?: (line: string) => void;
  readonly signal?: AbortSignal;
}

export interface ReplaySummary {
  readonly tracks: number;
  readonly points: number;
  readonly reconnects: number;
  readonly errors: number;
}

interface Outgoing {
  readonly track: RawTrack;
  readonly source: 'live' | 'sim';
  /** Next point index to send (0-based); seq = index + 1. */
  next: number;
  committed: number;
  opened: boolean;
  closed: boolean;
  closeSent: boolean;
  startedAt?: number;
}

const TICK_MS = 50;

export class ReplayError extends Error {
  constructor(readonly code: 'CONNECT_FAILED' | 'REFUSED' | 'ABORTED', message: string) {
    super(message);
    this.name = 'ReplayError';
  }
}

export async function replay(options: ReplayOptions): Promise<ReplaySummary> {
  const speed = options.speed ?? 1;
  const overlap = Math.max(1, options.overlap ?? 1);
  const batch = options.batch ?? 500;
  const window = options.window ?? 64;
  const maxReconnects = options.maxReconnects ?? 20;
  const say = options.onEvent ?? (() => undefined);
  const channels = options.plan.channels.map((c) => c.name);
  const keyOf = (t: RawTrack) => `${t.vignette}/${t.track}`;
  const all = new Map<string, Outgoing>();
  const sims = (options.sims ?? []).map((track) => ({ track, source: 'sim' as const, next: 0, committed: 0, opened: false, closed: false, closeSent: false }));
  const live = options.live.map((track) => ({ track, source: 'live' as const, next: 0, committed: 0, opened: false, closed: false, closeSent: false }));
  for (const o of [...sims, ...live]) all.set(keyOf(o.track), o);

  let ws: WebSocket | undefined;
  let reconnects = 0;
  let errors = 0;
  let inFlight = 0;
  let msgSeq = 0;
  let wake: (() => void) | undefined;
  const poke = () => {
    const w = wake;
    wake = undefined;
    w?.();
  };
  const sleep = (ms: number) =>
    new Promise<void>((r) => {
      const t = setTimeout(() => {
        wake = undefined;
        r();
      }, ms);
      wake = () => {
        clearTimeout(t);
        r();
      };
    });

  const onReply = (r: ServerReply) => {
    if (r.type === 'ack' || r.type === 'opened' || r.type === 'closed') {
      const o = all.get(`${r.vignette}/${r.track}`);
      if (o && r.type !== 'closed') {
        o.committed = Math.max(o.committed, r.committedSeq);
        if (r.type === 'opened') {
          o.opened = true;
          o.next = Math.max(o.next, r.committedSeq);
          if (r.closed) o.closed = true;
        }
      }
      if (o && r.type === 'closed') o.closed = true;
    } else if (r.type === 'error') {
      errors++;
      say(`server: ${r.code}: ${r.reason}`);
    }
    if (r.type !== 'opened' && inFlight > 0) inFlight--;
    poke();
  };

  const connect = async (): Promise<void> => {
    for (let attempt = 0; ; attempt++) {
      if (options.signal?.aborted) throw new ReplayError('ABORTED', 'replay aborted');
      try {
        ws = await new Promise<WebSocket>((res, rej) => {
          const s = new WebSocket(options.url, { headers: options.token ? { authorization: `Bearer ${options.token}` } : {} });
          s.once('open', () => res(s));
          s.once('error', rej);
          s.once('unexpected-response', (_req, resp) => rej(new ReplayError('REFUSED', `server refused the connection: ${resp.statusCode} ${resp.statusMessage ?? ''}`)));
        });
      } catch (e) {
        if (e instanceof ReplayError && e.code === 'REFUSED') throw e;
        if (attempt >= maxReconnects) throw new ReplayError('CONNECT_FAILED', `cannot reach ${options.url}: ${e instanceof Error ? e.message : String(e)}`);
        await sleep(Math.min(5000, 200 * 2 ** attempt));
        continue;
      }
      const s = ws;
      s.on('message', (d) => {
        try {
          onReply(JSON.parse(d.toString()) as ServerReply);
        } catch {
          errors++;
        }
      });
      s.on('error', () => undefined);
      s.on('close', () => {
        if (ws === s) ws = undefined;
        poke();
      });
      inFlight = 0;
      // Re-open every track we started, to learn where to resume.
      for (const o of all.values()) if (o.opened || o.next > 0) send({ type: 'open', vignette: o.track.vignette, track: o.track.track, source: o.source, channels }, false);
      return;
    }
  };

  const send = (body: Record<string, unknown>, counts = true) => {
    if (!ws || ws.readyState !== WebSocket.OPEN) return false;
    ws.send(JSON.stringify({ v: 1, id: `r${++msgSeq}`, ...body }));
    if (counts) inFlight++;
    return true;
  };

  const ensureOpen = async (o: Outgoing) => {
    if (o.opened) return;
    send({ type: 'open', vignette: o.track.vignette, track: o.track.track, source: o.source, channels }, false);
    for (let i = 0; i < 200 && !o.opened; i++) {
      if (!ws) return;
      await sleep(25);
    }
  };

  /** Send points of `o` up to (exclusive) index `upTo`, in messages of at most `batch`. */
  const pushPoints = (o: Outgoing, upTo: number): boolean => {
    const t = o.track;
    while (o.next < upTo) {
      if (inFlight >= window) return false;
      const end = Math.min(upTo, o.next + batch);
      const points = [];
      for (let i = o.next; i < end; i++) points.push({ seq: i + 1, t: t.t[i], values: t.values.map((v) => v[i]) });
      if (!send({ type: 'points', vignette: t.vignette, track: t.track, points })) return false;
      o.next = end;
    }
    return true;
  };

  const finish = (o: Outgoing) => {
    if (o.closed || o.closeSent) return o.closed;
    const n = o.track.t.length;
    if (o.committed < n) return false;
    o.closeSent = send({ type: 'close', vignette: o.track.vignette, track: o.track.track, lastSeq: n });
    return false;
  };

  await connect();
  let points = 0;
  const pending = [...sims];
  const queue = [...live];
  const flying: Outgoing[] = [];
  const eventStart = Date.now();
  for (let guard = 0; guard < 1e8; guard++) {
    if (options.signal?.aborted) {
      ws?.close();
      throw new ReplayError('ABORTED', 'replay aborted');
    }
    if (!ws) {
      reconnects++;
      say(`connection lost; reconnecting (${reconnects})`);
      if (reconnects > maxReconnects) throw new ReplayError('CONNECT_FAILED', `gave up after ${maxReconnects} reconnects`);
      // Resume from the server's committed point: anything not acknowledged is sent again.
      for (const o of all.values()) {
        o.next = o.committed;
        o.opened = false;
        o.closeSent = false;
      }
      await connect();
      continue;
    }
    let progressed = false;
    // Simulated tracks: as fast as acknowledgements allow.
    for (const o of pending) {
      if (o.closed) continue;
      await ensureOpen(o);
      if (!o.opened) break;
      if (o.closed) continue;
      pushPoints(o, o.track.t.length);
      finish(o);
      if (inFlight >= window) break;
    }
    while (pending.length > 0 && pending[0].closed) {
      const o = pending.shift() as Outgoing;
      points += o.track.t.length;
      progressed = true;
    }
    if (pending.length === 0) {
      while (flying.length < overlap && queue.length > 0) {
        const o = queue.shift() as Outgoing;
        o.startedAt = Date.now();
        flying.push(o);
        say(`run ${o.track.vignette}/${o.track.track} started`);
      }
      for (const o of flying) {
        await ensureOpen(o);
        if (!o.opened || o.closed) continue;
        const elapsed = speed > 0 ? ((Date.now() - (o.startedAt ?? eventStart)) / 1000) * speed : Number.POSITIVE_INFINITY;
        let due = o.next;
        while (due < o.track.t.length && o.track.t[due] <= elapsed) due++;
        pushPoints(o, due);
        if (o.next === o.track.t.length) finish(o);
      }
      for (let i = flying.length - 1; i >= 0; i--) {
        if (flying[i].closed) {
          const o = flying.splice(i, 1)[0];
          points += o.track.t.length;
          progressed = true;
          say(`run ${o.track.vignette}/${o.track.track} closed`);
        }
      }
      if (flying.length === 0 && queue.length === 0) break;
    }
    if (!progressed) await sleep(pending.length > 0 || speed === 0 ? 5 : TICK_MS);
  }
  ws?.close();
  return { tracks: all.size, points, reconnects, errors };
}
