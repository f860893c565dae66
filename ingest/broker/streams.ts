/**
 * Connecting to the broker and making sure the event's two streams exist.
 *
 * The input stream keeps every producer message (file storage, limits retention: the record of
 * what was published, which a monitor replays from its durable consumer). A publish carries a
 * message id (`Nats-Msg-Id`), so a producer that retries after a lost acknowledgement does not
 * store a message twice within the duplicate window. The results stream keeps the last value of
 * each subject: each run's final result and each monitor's announcement.
 */
import { connect, nanos, type NatsConnection } from '@nats-io/transport-node';
import { jetstreamManager, RetentionPolicy, StorageType, type JetStreamManager } from '@nats-io/jetstream';
import { inputFilter, inputStream, resultsFilters, resultsStream, type Layout } from './subjects.js';

export class BrokerError extends Error {
  constructor(
    readonly code: 'BROKER_UNREACHABLE' | 'BROKER_NO_JETSTREAM' | 'UNKNOWN_VIGNETTE' | 'BAD_SHARD' | 'BAD_USAGE' | 'PUBLISH_FAILED',
    message: string,
  ) {
    super(message);
    this.name = 'BrokerError';
  }
}

/** Duplicate window of the input stream (publishes with the same message id inside it are stored once). */
export const DUPLICATE_WINDOW_MS = 10 * 60_000;

export async function connectBroker(url: string, name: string): Promise<NatsConnection> {
  const u = new URL(url.includes('://') ? url : `nats://${url}`);
  try {
    return await connect({ servers: `${u.hostname}:${u.port || '4222'}`, name, maxReconnectAttempts: -1, reconnectTimeWait: 500 });
  } catch (e) {
    throw new BrokerError('BROKER_UNREACHABLE', `cannot reach the broker at ${url}: ${e instanceof Error ? e.message : String(e)} (start it with \`nats-server -js -sd DIR\`)`);
  }
}

export async function ensureStreams(nc: NatsConnection, layout: Layout): Promise<JetStreamManager> {
  let jsm: JetStreamManager;
  try {
    jsm = await jetstreamManager(nc);
  } catch (e) {
    throw new BrokerError('BROKER_NO_JETSTREAM', `the broker has no JetStream (start nats-server with -js): ${e instanceof Error ? e.message : String(e)}`);
  }
  const want = [
    { name: inputStream(layout), subjects: [inputFilter(layout)], duplicate_window: nanos(DUPLICATE_WINDOW_MS) },
    { name: resultsStream(layout), subjects: resultsFilters(layout), max_msgs_per_subject: 1 },
  ];
  for (const s of want) {
    try {
      await jsm.streams.info(s.name);
    } catch {
      await jsm.streams.add({ ...s, storage: StorageType.File, retention: RetentionPolicy.Limits });
    }
  }
  return jsm;
}
