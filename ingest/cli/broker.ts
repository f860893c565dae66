/**
 * The broker's side of the `plumbline` command:
 *   serve --broker URL --shard V1,V2 [--shard-name N] [--event E]   the service as a shard monitor
 *   publish --broker URL --live FILE --plan FILE [--event E] [--speed X] [--overlap N] [--points-per-message N]
 *   gather --broker URL [--event E] [--host H] [--port N]           one dashboard over every monitor of the event
 */
import type { Source } from '../service/source.js';
import { parseArgs } from 'node:util';
import { loadPlan } from '../plan.js';
import { readTracks } from '../tracks-reader.js';
import type { RunningServer } from '../service/server.js';
import { startGatherer } from '../broker/gather.js';
import { startMonitor, type Monitor } from '../broker/monitor.js';
import { publishTracks } from '../broker/publisher.js';
import { BrokerError, connectBroker, ensureStreams } from '../broker/streams.js';
import { DEFAULT_PREFIX, type Layout } from '../broker/subjects.js';

export const BROKER_USAGE = `  serve ... --broker nats://HOST:PORT --shard V1,V2 [--shard-name N] [--event E]
      the service as one monitor of a sharded event: read the vignettes V1, V2 from the
      broker's stream (JetStream durable consumers), publish their final results
  publish --broker nats://HOST:PORT --live FILE --plan FILE [--event E] [--speed X] [--overlap N]
          [--points-per-message N]
      publish recorded runs to the broker as a producer would (default: as fast as it takes them)
  gather --broker nats://HOST:PORT [--event E] [--host H] [--port N]
      one dashboard and /api/state over every monitor of the event (default port 7350)`;

export const DEFAULT_EVENT = 'event';

function layoutOf(event: unknown): Layout {
  return { prefix: DEFAULT_PREFIX, event: typeof event === 'string' && event.length > 0 ? event : DEFAULT_EVENT };
}

function positive(value: unknown, name: string, fallback: number): number {
  if (value === undefined) return fallback;
  const n = Number(value);
  if (!(n > 0)) throw new BrokerError('BAD_USAGE', `--${name} must be a positive number, got ${String(value)}`);
  return n;
}

/** `serve --broker`: attach a shard monitor to the running service; the returned monitor is closed before the service. */
export async function attachMonitor(server: RunningServer, values: { broker?: unknown; shard?: unknown; 'shard-name'?: unknown; event?: unknown }, log: (line: string) => void): Promise<{ monitor: Monitor; close(): Promise<void> } | undefined> {
  if (typeof values.broker !== 'string') {
    if (values.shard !== undefined) throw new BrokerError('BAD_SHARD', '--shard needs --broker nats://HOST:PORT');
    return undefined;
  }
  if (typeof values.shard !== 'string') throw new BrokerError('BAD_SHARD', '--broker needs --shard V1,V2 (the vignettes this monitor owns)');
  const vignettes = values.shard.split(',').map((s) => s.trim()).filter((s) => s.length > 0);
  const nc = await connectBroker(values.broker, `plumbline monitor ${values.shard}`);
  // The monitor is one of the service's in-process sources (ingest/service/source.ts): /healthz
  // lists its counters, and closing the server stops it before the last commit.
  let monitor: Monitor | undefined;
  let stopping: Promise<void> | undefined;
  const stop = () =>
    (stopping ??= (async () => {
      if (monitor) {
        await monitor.close();
        await nc.drain();
        log(monitorSummary(monitor));
      } else await nc.close();
    })());
  const source: Source = {
    name: 'broker',
    async start(submit) {
      monitor = await startMonitor({ server: { ...server, submit }, nc, layout: layoutOf(values.event), vignettes, shard: typeof values['shard-name'] === 'string' ? values['shard-name'] : undefined, log });
    },
    stop,
    counters: () => (monitor ? { shard: monitor.shard, ...monitor.stats() } : { starting: true }),
  };
  try {
    await server.addSource(source);
  } catch (e) {
    await stop();
    throw e;
  }
  return { monitor: monitor as Monitor, close: stop };
}

/** One line: what the monitor did, and its publish → journaled acknowledgement latency. */
export function monitorSummary(monitor: Monitor): string {
  const s = monitor.stats();
  const lat = Float64Array.from(monitor.latencies()).sort();
  const q = (p: number) => (lat.length > 0 ? lat[Math.min(lat.length - 1, Math.floor(p * lat.length))].toFixed(1) : '-');
  const terminated = Object.entries(s.terminated).map(([c, n]) => `${c} ${n}`).join(', ') || 'none';
  return `broker: shard ${monitor.shard}: ${s.received} messages, ${s.acknowledged} acknowledged, ${s.acceptedPoints} points journaled, ${s.duplicatePoints} duplicate points, ${s.retried} retried, terminated: ${terminated}; publish → journaled ack p50 ${q(0.5)} ms, p99 ${q(0.99)} ms (${lat.length} messages)`;
}

export async function publishCommand(args: string[]): Promise<number> {
  const { values } = parseArgs({ args, strict: true, options: { broker: { type: 'string' }, live: { type: 'string' }, plan: { type: 'string' }, event: { type: 'string' }, speed: { type: 'string' }, overlap: { type: 'string' }, 'points-per-message': { type: 'string' } } });
  if (!values.broker || !values.live || !values.plan) throw new BrokerError('BAD_USAGE', 'publish needs --broker nats://HOST:PORT, --live FILE and --plan FILE');
  const plan = await loadPlan(values.plan);
  const tracks = (await readTracks(values.live, plan)).tracks;
  const nc = await connectBroker(values.broker, 'plumbline publish');
  try {
    const layout = layoutOf(values.event);
    await ensureStreams(nc, layout);
    const started = performance.now();
    const s = await publishTracks(nc, tracks, {
      layout,
      plan,
      speed: values.speed === undefined ? Number.POSITIVE_INFINITY : positive(values.speed, 'speed', 1),
      overlap: positive(values.overlap, 'overlap', 4),
      pointsPerMessage: Math.min(1000, Math.floor(positive(values['points-per-message'], 'points-per-message', 50))),
    });
    process.stderr.write(`published ${s.points} points of ${s.tracks} runs in ${s.messages} messages (${s.duplicates} already stored) in ${((performance.now() - started) / 1000).toFixed(1)} s\n`);
  } finally {
    await nc.drain();
  }
  return 0;
}

export async function gatherCommand(args: string[], staticDir: string | undefined): Promise<number> {
  const { values } = parseArgs({ args, strict: true, options: { broker: { type: 'string' }, event: { type: 'string' }, host: { type: 'string' }, port: { type: 'string' } } });
  if (!values.broker) throw new BrokerError('BAD_USAGE', 'gather needs --broker nats://HOST:PORT');
  const nc = await connectBroker(values.broker, 'plumbline gather');
  const g = await startGatherer({ nc, layout: layoutOf(values.event), host: values.host ?? '127.0.0.1', port: values.port === undefined ? 7350 : positive(values.port, 'port', 7350), staticDir, log: (line) => process.stderr.write(`${line}\n`) });
  process.stderr.write(`plumbline gather is serving ${g.url}\n`);
  await new Promise<void>((res) => {
    process.once('SIGINT', () => res());
    process.once('SIGTERM', () => res());
  });
  await g.close();
  await nc.drain();
  return 0;
}
