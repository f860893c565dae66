/**
 * The DIS source of `plumbline serve`: `--dis udp://HOST:PORT` (unicast, broadcast or a multicast
 * group), `--dis-map FILE` (the mapping file of `dis-bridge`), and the plan's `sources.dis` block.
 *
 *   plan sources.dis          the source starts with the service; --dis overrides its listen
 *   --dis URL --dis-map FILE  the mapping from the file (silence: the plan's, or 10 s)
 *   --dis URL alone           needs the plan's sources.dis block
 */
import type { EventPlan, PlanSources } from '../plan.js';
import { BridgeError, formatStats, type RunningDisSource } from '../dis/bridge.js';
import { listenTarget } from '../dis/listen.js';
import { DEFAULT_SILENCE, loadDisMapping } from '../dis/mapping.js';
import { ServiceDisSource, type ServiceDisConfig } from '../dis/service-source.js';
import type { Source } from '../service/source.js';
import { DisBridgeError, DisBridgeUsageError } from './dis-bridge.js';

export interface ServeDisArgs {
  readonly dis?: string;
  readonly map?: string;
  readonly sources: PlanSources;
}

/** The source's configuration from the options and the plan; undefined when there is no DIS source. */
export async function serveDisConfig(a: ServeDisArgs): Promise<{ config: ServiceDisConfig; origin: string } | undefined> {
  const block = a.sources.dis;
  if (a.dis !== undefined) {
    try {
      listenTarget(a.dis, a.map === undefined ? block?.interface : undefined, '--dis');
    } catch (e) {
      throw new DisBridgeUsageError(e instanceof Error ? e.message : String(e));
    }
  }
  if (a.map !== undefined) {
    if (a.dis === undefined && block === undefined) throw new DisBridgeUsageError('--dis-map goes with --dis udp://HOST:PORT (or a plan with a sources.dis block)');
    const mapping = await loadDisMapping(a.map);
    return { config: { ...mapping, listen: a.dis ?? block!.listen, silence: block?.silence ?? DEFAULT_SILENCE }, origin: a.map };
  }
  if (block !== undefined) return { config: { ...block, listen: a.dis ?? block.listen }, origin: 'plan sources.dis' };
  if (a.dis !== undefined) throw new DisBridgeUsageError('--dis needs the entity mapping: a plan with a sources.dis block, or --dis-map FILE');
  return undefined;
}

/** Start the source in the service (registered as one of its sources); a source that cannot start is a DisBridgeError (exit 2). */
export async function startServeDis(server: { addSource(source: Source): Promise<void>; journal: { getMeta(key: string): string | undefined } }, plan: EventPlan | undefined, c: { config: ServiceDisConfig; origin: string }, say: (line: string) => void): Promise<RunningDisSource> {
  // without --plan, the plan is the journal's
  const active = plan ?? (JSON.parse(server.journal.getMeta('plan') as string) as EventPlan);
  try {
    // registered with the server: /healthz shows its counters and closing the server stops it
    const source = new ServiceDisSource({ plan: active, config: c.config, origin: c.origin, onEvent: say });
    await server.addSource(source);
    return source.running as RunningDisSource;
  } catch (e) {
    if (e instanceof BridgeError) throw new DisBridgeError(e.message);
    throw e;
  }
}

/** Stop the source (closing its open runs) and print its counters. */
export async function stopServeDis(source: RunningDisSource, say: (line: string) => void): Promise<void> {
  say('stopping the DIS source: closing the open runs');
  await source.close();
  say(formatStats(source.counters()));
}
