/**
 * The DIS source inside the service process (`plumbline serve --dis`, or the plan's `sources.dis`):
 * the UDP socket and router of bridge.ts with `SubmitOutput` as the output, so each run's messages
 * go through `RunningServer.submit` (batch → validate → journal → acknowledge) as a `/feed`
 * producer's would, without a socket in between. `ServiceDisSource` is the same as a `Source`
 * (../service/source.ts) the server starts, stops and lists in /healthz.
 */
import type { EventPlan } from '../plan.js';
import type { Source, Submit } from '../service/source.js';
import { closedLine, startDisSource, type DisSourceCounters, type RunningDisSource } from './bridge.js';
import { listenTarget } from './listen.js';
import { resolveMapping, type DisMapping } from './mapping.js';
import { SubmitOutput } from './submit-output.js';

/** What the source needs: where to listen, the mapping, the silence (the plan's `sources.dis` block). */
export interface ServiceDisConfig extends Pick<DisMapping, 'sites' | 'channels' | 'entities'> {
  /** udp://HOST:PORT; a multicast HOST is joined as a group. */
  readonly listen: string;
  /** With a multicast group: the interface address to join it on. */
  readonly interface?: string;
  /** Seconds without a PDU after which a run closes. */
  readonly silence: number;
}

export interface ServiceDisOptions {
  /** The running service (its `submit`). */
  readonly server: { submit: Submit };
  readonly plan: EventPlan;
  readonly config: ServiceDisConfig;
  /** Where the mapping came from, for error messages. */
  readonly origin?: string;
  readonly onEvent?: (line: string) => void;
  readonly noticeIntervalMs?: number;
}

/** Check the mapping against the plan, bind the socket and start routing PDUs into the service. */
export async function startServiceDisSource(o: ServiceDisOptions): Promise<RunningDisSource> {
  const target = listenTarget(o.config.listen, o.config.interface, 'listen');
  const entries = resolveMapping(o.config, o.plan, o.origin ?? 'sources.dis');
  const output = new SubmitOutput(o.server.submit, {
    channels: o.plan.channels.map((c) => c.name),
    onEvent: o.onEvent,
    onClosed: (v, t, already) => o.onEvent?.(closedLine(v, t, already)),
  });
  return startDisSource({ ...target, output, plan: o.plan, entries, silence: o.config.silence, onEvent: o.onEvent, noticeIntervalMs: o.noticeIntervalMs });
}

/** The DIS source as the server's `Source`: started with the server's `submit`, its counters in /healthz. */
export class ServiceDisSource implements Source {
  readonly name = 'dis';
  private source?: RunningDisSource;

  constructor(private readonly options: Omit<ServiceDisOptions, 'server'>) {}

  async start(submit: Submit): Promise<void> {
    if (this.source) throw new Error('the DIS source is already started');
    this.source = await startServiceDisSource({ ...this.options, server: { submit } });
    // The DIS settings are not part of the stored plan (changing a port must not refuse the
    // journal), so the settings this start used go into the event log, for the debrief.
    submit({ v: 1, type: 'note', id: `dis-settings-${Date.now()}`, text: settingsLine(this.options.config), author: 'dis source' }, () => undefined);
  }

  /** The running source once started. */
  get running(): RunningDisSource | undefined {
    return this.source;
  }

  counters(): DisSourceCounters | Record<string, never> {
    return this.source?.counters() ?? {};
  }

  /** Closes the open runs and the socket; the running source's close is idempotent. */
  stop(): Promise<void> {
    return this.source?.close() ?? Promise.resolve();
  }
}

/** One line of the settings a DIS source started with (sites, channel quantities, entities, silence). */
export function settingsLine(c: ServiceDisConfig): string {
  const sites = Object.entries(c.sites).map(([n, x]) => `${n} (${x.lat}° N, ${x.lon}° E, ${x.height} m)`).join('; ');
  const channels = c.channels ? Object.entries(c.channels).map(([ch, q]) => `${ch} = ${q}`).join(', ') : 'plan channel names';
  const entities = c.entities.map((e) => `${e.exercise ?? '*'}:${e.site}:${e.application}:${e.entity} → ${e.vignette}/${e.track}`).join(', ');
  const line = `DIS source started: listening on ${c.listen}${c.interface ? ` (interface ${c.interface})` : ''}; runs close after ${c.silence} s of silence; sites: ${sites}; channels: ${channels}; entities: ${entities}`;
  return line.length <= 2000 ? line : `${line.slice(0, 1997)}...`;
}
