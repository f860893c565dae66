/**
 * A monitor's broker side: the shard's vignettes read from the input stream into a running
 * service, and the service's final results published for the gatherer.
 *
 *   input stream ─ durable consumer per vignette of the shard (in stream order)
 *     → subject and message checked (parseClientMessage; the subject's vignette and run must be the message's)
 *     → RunningServer.submit (the same batch → validate → journal → ack path as a /feed frame)
 *     → the service's reply: ack the broker message once the service acknowledged (journaled);
 *       a refused message (bad input) is terminated with a log line carrying the service's code;
 *       JOURNAL_UNAVAILABLE, INTERNAL and RATE_LIMITED are negatively acknowledged (redelivered
 *       after a pause); TRACK_NOT_OPEN and INCOMPLETE too, up to `orderDeliveries` deliveries
 *       (a retried message can put a run's messages out of order), then terminated
 *   service.changes$ → runs newly final → their p-values and the simulated runs' null triples
 *     (from the journal) → `<prefix>.<event>.result.<vignette>.<run>` (last value kept)
 *
 * Nothing doubles on redelivery: a resent point is counted as a duplicate by the service, `open`
 * of an existing track answers with its resume point, `close` of a closed track answers `closed`,
 * and a note identical to one in the journal (vignette, run, track time, text, author) is acknowledged
 * without being written again.
 *
 * Resuming. After a crash the consumer still holds the messages delivered to the dead process and
 * not acknowledged; the broker would redeliver them only after the acknowledgement wait, behind
 * later messages, which could put a `close` before the points it needs. So on start a consumer
 * with unacknowledged messages is recreated from its acknowledgement floor (everything at or below
 * it is journaled), and delivery starts again in stream order.
 */
import { AckPolicy, DeliverPolicy, jetstream, type ConsumerMessages, type JetStreamClient, type JetStreamManager, type JsMsg } from '@nats-io/jetstream';
import { nanos, type NatsConnection } from '@nats-io/transport-node';
import type { RunningServer } from '../service/server.js';
import { parseClientMessage, type ClientMessage, type ServerReply } from '../service/protocol.js';
import { BrokerError, ensureStreams } from './streams.js';
import { consumerName, inputFilter, inputStream, monitorSubject, parseInputSubject, resultSubject, type Layout } from './subjects.js';
import type { MonitorAnnouncement, RunResult } from './results.js';

/** Named limits of the monitor, with their defaults. */
export const MONITOR_LIMITS = {
  /** Messages the broker may hold out to one consumer before acknowledgements (JetStream max_ack_pending). */
  maxAckPending: 2000,
  /** Messages fetched per pull. */
  pullBatch: 500,
  /** How long the broker waits for an acknowledgement before it redelivers, ms. */
  ackWaitMs: 60_000,
  /** Delay before a message refused for a passing reason (journal unavailable) is delivered again, ms. */
  retryDelayMs: 1000,
  /**
   * Deliveries of a message refused for its order (points before their `open`, a `close` before
   * its points: after a retried message, delivery is no longer in stream order) before it is
   * terminated.
   */
  orderDeliveries: 4,
  /** Latency samples kept (the most recent). */
  latencySamples: 200_000,
} as const;

export interface MonitorOptions {
  readonly server: Pick<RunningServer, 'submit' | 'service' | 'journal' | 'url'>;
  readonly nc: NatsConnection;
  readonly layout: Layout;
  readonly vignettes: readonly string[];
  /** The shard's name (consumer names derive from it); default: its vignettes joined by '+'. */
  readonly shard?: string;
  readonly log?: (line: string) => void;
}

export interface MonitorStats {
  readonly received: number;
  readonly acknowledged: number;
  readonly terminated: Readonly<Record<string, number>>;
  readonly retried: number;
  readonly duplicatePoints: number;
  readonly duplicateNotes: number;
  readonly acceptedPoints: number;
  readonly resultsPublished: number;
}

export interface Monitor {
  readonly shard: string;
  stats(): MonitorStats;
  /** Milliseconds from the broker storing a message to the service's journaled acknowledgement (recent samples). */
  latencies(): Float64Array;
  close(): Promise<void>;
}

type Outcome = { kind: 'ack'; accepted: number; duplicates: number } | { kind: 'term'; code: string; reason: string } | { kind: 'retry'; code: string; reason: string };

const RETRY_CODES = new Set(['JOURNAL_UNAVAILABLE', 'INTERNAL', 'RATE_LIMITED']);
const ORDER_CODES = new Set(['TRACK_NOT_OPEN', 'INCOMPLETE']);

/** Submit one message and turn the service's reply (or replies, for a partly refused `points`) into one outcome. */
function submitOnce(server: MonitorOptions['server'], message: ClientMessage): Promise<Outcome> {
  return new Promise((resolve) => {
    let refused: Extract<ServerReply, { type: 'error' }> | undefined;
    server.submit(message, (r) => {
      if (r.type === 'error') {
        // A partly refused `points` message: the refusal comes first, the ack of the rest follows the journal commit.
        if (message.type === 'points' && r.rejected && r.code !== 'JOURNAL_UNAVAILABLE' && r.code !== 'INTERNAL') {
          refused = r;
          return;
        }
        resolve(RETRY_CODES.has(r.code) ? { kind: 'retry', code: r.code, reason: r.reason } : { kind: 'term', code: r.code, reason: r.reason });
        return;
      }
      if (refused) {
        const codes = [...new Set((refused.rejected ?? []).map((x) => x.code))].join(',');
        resolve({ kind: 'term', code: codes, reason: `${refused.reason}; ${r.type === 'ack' ? r.accepted : 0} accepted and journaled (${(refused.rejected ?? []).slice(0, 3).map((x) => `seq ${x.seq}: ${x.reason}`).join('; ')})` });
        return;
      }
      resolve({ kind: 'ack', accepted: r.type === 'ack' ? r.accepted : 0, duplicates: r.type === 'ack' ? r.duplicates : 0 });
    });
  });
}

interface StoredResultBody {
  readonly report?: { statistics?: Record<'l2' | 'score' | 'residual', { pValue: number }>; overall?: { pValue: number } };
  readonly nullPValues?: Record<'l2' | 'score' | 'residual', number[]>;
}

/** Open the shard's consumers (recreated from their acknowledgement floor when a previous process left messages unacknowledged). */
async function openConsumer(jsm: JetStreamManager, layout: Layout, name: string, vignette: string, log: (line: string) => void): Promise<void> {
  const stream = inputStream(layout);
  const config = {
    durable_name: name,
    ack_policy: AckPolicy.Explicit,
    filter_subject: inputFilter(layout, vignette),
    ack_wait: nanos(MONITOR_LIMITS.ackWaitMs),
    max_ack_pending: MONITOR_LIMITS.maxAckPending,
  };
  let info;
  try {
    info = await jsm.consumers.info(stream, name);
  } catch {
    info = undefined;
  }
  if (!info) {
    await jsm.consumers.add(stream, { ...config, deliver_policy: DeliverPolicy.All });
    log(`broker: consumer ${name} created (${config.filter_subject}, from the stream's start)`);
    return;
  }
  if (info.num_ack_pending > 0) {
    const from = info.ack_floor.stream_seq + 1;
    await jsm.consumers.delete(stream, name);
    await jsm.consumers.add(stream, { ...config, deliver_policy: DeliverPolicy.StartSequence, opt_start_seq: from });
    log(`broker: consumer ${name} resumes at stream message ${from} (${info.num_ack_pending} delivered to the previous process were not acknowledged)`);
    return;
  }
  log(`broker: consumer ${name} resumes after stream message ${info.delivered.stream_seq}`);
}

export async function startMonitor(options: MonitorOptions): Promise<Monitor> {
  const { server, nc, layout } = options;
  const log = options.log ?? (() => undefined);
  const planIds = server.service.snapshot().vignettes.map((v) => v.id);
  if (options.vignettes.length === 0) throw new BrokerError('BAD_SHARD', 'a shard needs at least one vignette (--shard S1-L1,S1-L2)');
  for (const v of options.vignettes) {
    if (!planIds.includes(v)) throw new BrokerError('UNKNOWN_VIGNETTE', `vignette "${v}" of the shard is not in the plan (${planIds.join(', ')})`);
  }
  const shard = options.shard ?? options.vignettes.join('+');
  const jsm = await ensureStreams(nc, layout);
  const js: JetStreamClient = jetstream(nc);

  const stats = { received: 0, acknowledged: 0, terminated: {} as Record<string, number>, retried: 0, duplicatePoints: 0, duplicateNotes: 0, acceptedPoints: 0, resultsPublished: 0 };
  const latency = new Float64Array(MONITOR_LIMITS.latencySamples);
  let latencyCount = 0;
  const terminate = (m: JsMsg, code: string, reason: string) => {
    stats.terminated[code] = (stats.terminated[code] ?? 0) + 1;
    log(`broker: terminated ${m.subject} #${m.seq} (${code}): ${reason}`);
    // No reason on the wire: nats-server 2.9 takes only a bare +TERM (a reason arrived in 2.10).
    m.term();
  };

  const noteSeen = (msg: Extract<ClientMessage, { type: 'note' }>): boolean =>
    server.journal.log().some((e) => {
      if (e.kind !== 'note' || e.vignette !== (msg.vignette ?? null) || e.track !== (msg.track ?? null) || e.t !== (msg.t ?? null)) return false;
      const b = e.body as { text?: string; author?: string };
      return b.text === msg.text && b.author === (msg.author ?? 'producer');
    });

  // The journaled points of closed tracks, read once per track when a redelivery needs them.
  const closedPoints = new Map<string, Map<number, Float64Array>>();
  const planChannels = server.service.snapshot().plan.channels.map((c) => c.name);
  const closedTrackHolds = (msg: Extract<ClientMessage, { type: 'points' }>): boolean => {
    const key = `${msg.vignette}\u0000${msg.track}`;
    const track = server.journal.tracks().find((t) => t.vignette === msg.vignette && t.track === msg.track);
    if (!track) return false;
    let points = closedPoints.get(key);
    if (!points) {
      const found = new Map<number, Float64Array>();
      server.journal.eachPoint((p) => {
        if (p.trackId === track.id) found.set(p.seq, Float64Array.of(p.t, ...p.values));
      });
      if (closedPoints.size >= 16) closedPoints.delete(closedPoints.keys().next().value as string);
      closedPoints.set(key, (points = found));
    }
    const order = track.channels.map((c) => planChannels.indexOf(c));
    return msg.points.every((p) => {
      const stored = points.get(p.seq);
      return stored !== undefined && stored[0] === p.t && p.values.length === order.length && p.values.every((x, i) => stored[1 + order[i]] === x);
    });
  };

  const handle = async (m: JsMsg): Promise<void> => {
    stats.received++;
    const where = parseInputSubject(layout, m.subject);
    if (!where) return terminate(m, 'BAD_SUBJECT', `the subject is not <prefix>.<event>.in.<vignette>.<run>`);
    const parsed = parseClientMessage(m.string());
    if (!parsed.ok) return terminate(m, parsed.error.code, parsed.error.reason);
    const msg = parsed.message;
    if (msg.type === 'ping') return terminate(m, 'NOT_PERMITTED', 'ping is not a producer message on the broker');
    if (msg.vignette !== where.vignette || msg.track !== where.run) {
      return terminate(m, 'SUBJECT_MISMATCH', `the message is for ${msg.vignette ?? '(no vignette)'}/${msg.track ?? '(no run)'} but was published on ${where.vignette}/${where.run}`);
    }
    if (msg.type === 'note' && noteSeen(msg)) {
      stats.duplicateNotes++;
      stats.acknowledged++;
      m.ack();
      return;
    }
    const outcome = await submitOnce(server, msg);
    switch (outcome.kind) {
      case 'ack': {
        m.ack();
        stats.acknowledged++;
        stats.acceptedPoints += outcome.accepted;
        stats.duplicatePoints += outcome.duplicates;
        const ms = Date.now() - m.info.timestampNanos / 1e6;
        latency[latencyCount % latency.length] = ms;
        latencyCount++;
        return;
      }
      case 'term':
        // Points of a closed track come back when the messages before its `close` are delivered
        // again: journaled already, they are duplicates, not errors.
        if (outcome.code === 'TRACK_CLOSED' && msg.type === 'points' && closedTrackHolds(msg)) {
          m.ack();
          stats.acknowledged++;
          stats.duplicatePoints += msg.points.length;
          return;
        }
        if (ORDER_CODES.has(outcome.code) && m.info.deliveryCount < MONITOR_LIMITS.orderDeliveries) {
          stats.retried++;
          log(`broker: ${m.subject} #${m.seq} will be delivered again (${outcome.code}, delivery ${m.info.deliveryCount} of ${MONITOR_LIMITS.orderDeliveries}): ${outcome.reason}`);
          m.nak(MONITOR_LIMITS.retryDelayMs);
          return;
        }
        return terminate(m, outcome.code, outcome.reason);
      case 'retry':
        stats.retried++;
        log(`broker: ${m.subject} #${m.seq} will be delivered again (${outcome.code}): ${outcome.reason}`);
        m.nak(MONITOR_LIMITS.retryDelayMs);
        return;
    }
  };

  // One consumer per vignette; each message is submitted as it arrives (in stream order), and the
  // replies come back after the service's next journal commit, so many messages are in flight.
  const iterators: ConsumerMessages[] = [];
  const loops: Promise<void>[] = [];
  for (const vignette of options.vignettes) {
    const name = consumerName(shard, vignette);
    await openConsumer(jsm, layout, name, vignette, log);
    const consumer = await js.consumers.get(inputStream(layout), name);
    const it = await consumer.consume({ max_messages: MONITOR_LIMITS.pullBatch });
    iterators.push(it);
    loops.push(
      (async () => {
        const inFlight = new Set<Promise<void>>();
        for await (const m of it) {
          const p: Promise<void> = handle(m).catch((e: unknown) => log(`broker: ${m.subject} #${m.seq}: ${e instanceof Error ? e.message : String(e)}`));
          inFlight.add(p);
          void p.finally(() => inFlight.delete(p));
          if (inFlight.size >= MONITOR_LIMITS.maxAckPending) await Promise.race(inFlight);
        }
        await Promise.all(inFlight);
      })(),
    );
  }

  // ------------------------------------------------------------- results for the gatherer
  // Each run's published p-values: a run judged again (a refit after simulated runs were added) is published again.
  const published = new Map<string, string>();
  const fingerprint = (p: { l2: number; score: number; residual: number; overall: number }) => `${p.l2} ${p.score} ${p.residual} ${p.overall}`;
  let scanTimer: NodeJS.Timeout | undefined;
  let scanning: Promise<void> = Promise.resolve();
  const scan = async () => {
    const tracks = server.journal.tracks();
    const byId = new Map(tracks.map((t) => [t.id, t]));
    const results = server.journal.results();
    for (const [id, body] of results) {
      const t = byId.get(id);
      if (!t || t.source !== 'live' || !options.vignettes.includes(t.vignette)) continue;
      const key = `${t.vignette}/${t.track}`;
      const b = body as StoredResultBody;
      const st = b.report?.statistics;
      if (!st || !b.nullPValues || !b.report?.overall) continue;
      const print = fingerprint({ l2: st.l2.pValue, score: st.score.pValue, residual: st.residual.pValue, overall: b.report.overall.pValue });
      if (published.get(key) === print) continue;
      const result: RunResult = {
        kind: 'result',
        shard,
        monitor: server.url,
        vignette: t.vignette,
        track: t.track,
        closedAt: t.closedAt ?? 0,
        pValues: { l2: st.l2.pValue, score: st.score.pValue, residual: st.residual.pValue },
        overall: b.report.overall.pValue,
        nullPValues: b.nullPValues,
      };
      await js.publish(resultSubject(layout, t.vignette, t.track), JSON.stringify(result));
      published.set(key, print);
      stats.resultsPublished++;
    }
  };
  const scheduleScan = () => {
    scanTimer ??= setTimeout(() => {
      scanTimer = undefined;
      scanning = scanning.then(scan).catch((e: unknown) => log(`broker: publishing results: ${e instanceof Error ? e.message : String(e)}`));
    }, 200);
  };
  // Only a run newly judged final sends the monitor to the journal (the results are read in full there).
  const changes = server.service.changes$.subscribe((c) => {
    if (c.kind !== 'run') return;
    const j = server.service.runView(c.key)?.judgement;
    if (j?.kind === 'final' && published.get(c.key) !== fingerprint(j.pValues)) scheduleScan();
  });
  const announcement: MonitorAnnouncement = { kind: 'monitor', shard, monitor: server.url, vignettes: [...options.vignettes], at: Date.now() };
  await js.publish(monitorSubject(layout, shard), JSON.stringify(announcement));
  scheduleScan();
  log(`broker: shard ${shard} (${options.vignettes.join(', ')}) reading ${inputStream(layout)}`);

  return {
    shard,
    stats: () => ({ ...stats, terminated: { ...stats.terminated } }),
    latencies: () => latency.slice(0, Math.min(latencyCount, latency.length)),
    async close() {
      changes.unsubscribe();
      for (const it of iterators) await it.close();
      await Promise.all(loops);
      if (scanTimer) {
        clearTimeout(scanTimer);
        scanTimer = undefined;
        scanning = scanning.then(scan).catch(() => undefined);
      }
      await scanning;
    },
  };
}
