/**
 * A producer on the broker: a track file's runs as feed-protocol messages (open, points in
 * messages of up to `pointsPerMessage`, close) on `<prefix>.<event>.in.<vignette>.<run>`, each
 * published with a message id and awaited (the broker's acknowledgement says it is stored).
 * Several runs are published at once (`overlap`), as runs fly side by side at the range.
 */
import { jetstream, type JetStreamClient } from '@nats-io/jetstream';
import type { NatsConnection } from '@nats-io/transport-node';
import type { ClientMessage } from '../service/protocol.js';
import type { RawTrack } from '../../engine/types.js';
import { BrokerError } from './streams.js';
import { inputSubject, type Layout } from './subjects.js';

export interface PublishOptions {
  readonly layout: Layout;
  readonly plan: { readonly channels: ReadonlyArray<{ readonly name: string }> };
  readonly source?: 'live' | 'sim';
  readonly pointsPerMessage?: number;
  /** Runs published side by side (default 4). */
  readonly overlap?: number;
  /** Track-time speed-up (track seconds per wall second); Infinity (default) publishes as fast as the broker takes it. */
  readonly speed?: number;
  /**
   * Publishes of one run that may wait for the broker's acknowledgement at once (default 1). The
   * broker stores one connection's messages in the order sent, so a run stays in order; with more
   * than one, a failed publish may leave a gap before later messages (the monitor then refuses a
   * `close` with INCOMPLETE): publish the run again from its start, which doubles nothing.
   */
  readonly window?: number;
  /** Called with each message's publish time (ms, performance.now() clock) and id. */
  readonly onPublished?: (id: string, at: number) => void;
}

export interface PublishSummary {
  readonly tracks: number;
  readonly points: number;
  readonly messages: number;
  readonly duplicates: number;
}

/** The feed messages of one track, in order. */
export function trackMessages(track: RawTrack, channels: readonly string[], source: 'live' | 'sim', pointsPerMessage: number): ClientMessage[] {
  const ref = { vignette: track.vignette, track: track.track };
  const out: ClientMessage[] = [{ v: 1, type: 'open', id: `${track.track}:open`, ...ref, source, channels: [...channels] }];
  const n = track.t.length;
  for (let start = 0; start < n; start += pointsPerMessage) {
    const points = [];
    for (let i = start; i < Math.min(n, start + pointsPerMessage); i++) {
      points.push({ seq: i + 1, t: track.t[i], values: track.values.map((v) => v[i]) });
    }
    out.push({ v: 1, type: 'points', id: `${track.track}:p${start + 1}`, ...ref, points });
  }
  out.push({ v: 1, type: 'close', id: `${track.track}:close`, ...ref, lastSeq: n });
  return out;
}

/** Publish one message and wait for the broker to store it; the message id makes a retry harmless. */
export async function publishMessage(js: JetStreamClient, layout: Layout, m: ClientMessage & { vignette: string; track: string }): Promise<{ duplicate: boolean }> {
  try {
    const ack = await js.publish(inputSubject(layout, m.vignette, m.track), JSON.stringify(m), { msgID: `${m.vignette}\u0000${m.track}\u0000${m.id}` });
    return { duplicate: ack.duplicate };
  } catch (e) {
    throw new BrokerError('PUBLISH_FAILED', `publishing ${m.type} ${m.id} of ${m.vignette}/${m.track}: ${e instanceof Error ? e.message : String(e)}`);
  }
}

export async function publishTracks(nc: NatsConnection, tracks: readonly RawTrack[], options: PublishOptions): Promise<PublishSummary> {
  const js = jetstream(nc);
  const channels = options.plan.channels.map((c) => c.name);
  const per = options.pointsPerMessage ?? 50;
  const speed = options.speed ?? Number.POSITIVE_INFINITY;
  let messages = 0;
  let duplicates = 0;
  let points = 0;
  const queue = [...tracks];
  const window = Math.max(1, options.window ?? 1);
  const one = async (track: RawTrack) => {
    const started = performance.now();
    const pending = new Set<Promise<void>>();
    for (const m of trackMessages(track, channels, options.source ?? 'live', per)) {
      if (m.type === 'points' && Number.isFinite(speed)) {
        const due = started + (m.points[0].t / speed) * 1000;
        const wait = due - performance.now();
        if (wait > 0) await new Promise((r) => setTimeout(r, wait));
      }
      options.onPublished?.(m.id, performance.now());
      const p: Promise<void> = publishMessage(js, options.layout, m as ClientMessage & { vignette: string; track: string }).then((r) => {
        messages++;
        if (r.duplicate) duplicates++;
        if (m.type === 'points') points += m.points.length;
      });
      pending.add(p);
      void p.then(
        () => pending.delete(p),
        () => undefined,
      );
      if (pending.size >= window) await Promise.race(pending);
    }
    await Promise.all(pending);
  };
  const lanes = Array.from({ length: Math.max(1, options.overlap ?? 4) }, async () => {
    for (let t = queue.shift(); t; t = queue.shift()) await one(t);
  });
  await Promise.all(lanes);
  return { tracks: tracks.length, points, messages, duplicates };
}
