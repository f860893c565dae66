/**
 * `plumbline dis-bridge`: listen for DIS Entity State PDUs and feed the mapped entities to a running
 * service as runs, until SIGINT/SIGTERM; then close the open runs and print the counters.
 */
import type { EventPlan } from '../plan.js';
import { BridgeError, closedLine, formatStats, isMulticast, parseListen, startDisSource } from '../dis/bridge.js';
import { FeedClient, FeedClientError } from '../dis/feed-client.js';
import { loadDisMapping, resolveMapping } from '../dis/mapping.js';

/** A bad option value of the command (exit code 2 with the usage). */
export class DisBridgeUsageError extends Error {}
/** The bridge could not start (socket or service unreachable); exit code 2. */
export class DisBridgeError extends Error {}

export interface DisBridgeCommand {
  readonly listen: string;
  readonly group?: string;
  readonly url: string;
  readonly plan: EventPlan;
  readonly mapPath: string;
  readonly silence?: string | boolean;
  readonly token?: string;
}

export async function disBridgeCommand(o: DisBridgeCommand): Promise<number> {
  const silence = o.silence === undefined ? undefined : Number(o.silence);
  if (silence !== undefined && !(typeof o.silence === 'string' && Number.isFinite(silence) && silence > 0)) {
    throw new DisBridgeUsageError(`--silence must be a number of seconds > 0, got ${String(o.silence)}`);
  }
  let listen: { host: string; port: number };
  try {
    listen = parseListen(o.listen);
  } catch (e) {
    throw new DisBridgeUsageError(e instanceof Error ? e.message : String(e));
  }
  if (o.group !== undefined && !isMulticast(o.group)) throw new DisBridgeUsageError(`--group must be a multicast address, got ${JSON.stringify(o.group)}`);
  const entries = resolveMapping(await loadDisMapping(o.mapPath), o.plan, o.mapPath);
  const say = (line: string) => process.stderr.write(`${line}\n`);
  const feed = new FeedClient({ url: o.url, token: o.token, channels: o.plan.channels.map((c) => c.name), onEvent: say, onClosed: (v, t, already) => say(closedLine(v, t, already)) });
  let bridge;
  try {
    await feed.connect();
    bridge = await startDisSource({ ...listen, group: o.group, output: feed, plan: o.plan, entries, silence, onEvent: say });
  } catch (e) {
    feed.stop();
    if (e instanceof BridgeError || e instanceof FeedClientError) throw new DisBridgeError(e.message);
    throw e;
  }
  await new Promise<void>((res) => {
    process.once('SIGINT', () => res());
    process.once('SIGTERM', () => res());
  });
  process.stderr.write('stopping: closing the open runs\n');
  await bridge.close();
  process.stderr.write(`${formatStats(bridge.counters())}\n`);
  return 0;
}
