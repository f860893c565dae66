/**
 * The DIS entity-state bridge: a producer in front of the live service.
 *
 *   UDP datagram → splitDatagram (pdu.ts) → EntityRouter: mapping lookup (exercise, site,
 *   application, entity) → run state → TrackClock (time.ts) → LocalFrame (geodesy.ts) → plan
 *   channels → RunOutput (run-output.ts) → the service
 *
 * The output is either the WebSocket feed client (`plumbline dis-bridge`, a separate process) or
 * `RunningServer.submit` (`plumbline serve --dis`, in the service process); this file does not
 * know which.
 *
 * A run opens at its entity's first Entity State PDU and closes after `silence` seconds of receive
 * time without one (time the process was stalled not counted: StallFreeClock), or at the first
 * PDU past the vignette horizon (later PDUs of that entity are
 * then ignored until it has been silent for `silence` seconds). An entity that reappears after its
 * run closed starts the next run, `<track>-r2`, `-r3`, ... Bad PDUs are counted by code and never
 * stop the bridge; so are PDUs of other types, unmapped entities and stamps that do not move forward.
 * Bad PDUs and unmapped entities are also logged, rate-limited with counts (counted-log.ts).
 */
import { createSocket, type Socket } from 'node:dgram';
import { isIP } from 'node:net';
import type { EventPlan } from '../plan.js';
import { COUNTED_LOG_INTERVAL_MS, CountedLog } from './counted-log.js';
import { BridgeError, isMulticast } from './listen.js';
import { LocalFrame } from './geodesy.js';
import { DEFAULT_SILENCE, type ResolvedEntity } from './mapping.js';
import { splitDatagram, type EntityStatePdu } from './pdu.js';
import type { RunOutput } from './run-output.js';

export { BridgeError, isMulticast, listenTarget, parseListen } from './listen.js';
import { TrackClock } from './time.js';

/** Limits and defaults of the bridge. */
export const BRIDGE_DEFAULTS = {
  /** Seconds without a PDU after which a run is closed. */
  silence: DEFAULT_SILENCE,
  /** How often runs are checked for silence, ms (at most; a quarter of the silence when shorter). */
  silenceCheckMs: 250,
  /** How often buffered points are sent, ms. */
  flushMs: 50,
  /** Largest datagram read, bytes (a DIS PDU is at most 8192 bytes). */
  maxDatagram: 8192,
} as const;

/** Counters of everything the bridge saw (all cumulative). */
export interface BridgeStats {
  datagrams: number;
  entityStatePdus: number;
  otherPdus: number;
  /** Malformed PDUs, by decoder error code. */
  bad: Record<string, number>;
  /** Entity State PDUs of entities (or exercises) the mapping does not name. */
  unmapped: number;
  /** PDUs whose time stamp did not move the run's time forward (late or repeated). */
  notAfter: number;
  /** PDUs whose absolute/relative time bit differs from the run's first PDU. */
  timeKindChanged: number;
  /** PDUs past the vignette horizon or of a run that ended at it and is not yet silent. */
  pastHorizon: number;
  points: number;
  runsOpened: number;
  runsClosed: number;
}

export function emptyStats(): BridgeStats {
  return { datagrams: 0, entityStatePdus: 0, otherPdus: 0, bad: {}, unmapped: 0, notAfter: 0, timeKindChanged: 0, pastHorizon: 0, points: 0, runsOpened: 0, runsClosed: 0 };
}

/** What the router asks its sink to do. */
export interface RunSink {
  open(vignette: string, track: string, source: 'live' | 'sim'): void;
  point(vignette: string, track: string, t: number, values: number[]): void;
  close(vignette: string, track: string, why: 'silence' | 'horizon' | 'stop'): void;
}

interface EntityState {
  readonly entry: ResolvedEntity;
  readonly frame: LocalFrame;
  readonly horizon: number;
  /** Runs started so far for this entity. */
  runs: number;
  run?: { track: string; clock: TrackClock; ended: boolean };
  lastHeardMs: number;
}

/** Entity id as a map key; the exercise is matched separately. */
const entityKey = (site: number, application: number, entity: number) => `${site}:${application}:${entity}`;

/**
 * Routing without I/O: PDUs in, run opens / points / closes out through a sink. Time comes from
 * the caller (receive time in ms), so tests drive it directly.
 */
export class EntityRouter {
  readonly stats: BridgeStats = emptyStats();
  private readonly byId = new Map<string, EntityState[]>();

  constructor(
    plan: EventPlan,
    entries: readonly ResolvedEntity[],
    private readonly sink: RunSink,
    private readonly silenceMs: number = BRIDGE_DEFAULTS.silence * 1000,
    /** Told of each bad PDU and unmapped entity (code, and a thunk for the detail line). */
    private readonly notice: (code: string, detail: () => string) => void = () => undefined,
  ) {
    const horizons = new Map(plan.vignettes.map((v) => [v.id, v.horizon]));
    for (const entry of entries) {
      const k = entityKey(entry.site, entry.application, entry.entity);
      const list = this.byId.get(k) ?? [];
      list.push({ entry, frame: new LocalFrame(entry.siteLocation), horizon: horizons.get(entry.vignette) ?? Number.POSITIVE_INFINITY, runs: 0, lastHeardMs: Number.NEGATIVE_INFINITY });
      this.byId.set(k, list);
    }
  }

  private lookup(pdu: EntityStatePdu): EntityState | undefined {
    const list = this.byId.get(entityKey(pdu.entityId.site, pdu.entityId.application, pdu.entityId.entity));
    // an entry for this exercise wins over one for any exercise
    return list?.find((s) => s.entry.exercise === pdu.exercise) ?? list?.find((s) => s.entry.exercise === undefined);
  }

  /** Handle one datagram received at `nowMs`. */
  datagram(bytes: Uint8Array, nowMs: number): void {
    this.stats.datagrams++;
    for (const item of splitDatagram(bytes)) {
      if (item.kind === 'error') {
        const error = item.error;
        this.stats.bad[error.code] = (this.stats.bad[error.code] ?? 0) + 1;
        this.notice(error.code, () => error.message);
      } else if (item.kind === 'other') this.stats.otherPdus++;
      else this.entityState(item.pdu, nowMs);
    }
  }

  /** Handle one decoded Entity State PDU received at `nowMs`. */
  entityState(pdu: EntityStatePdu, nowMs: number): void {
    this.stats.entityStatePdus++;
    const s = this.lookup(pdu);
    if (!s) {
      this.stats.unmapped++;
      this.notice('UNMAPPED_ENTITY', () => `exercise ${pdu.exercise}, entity ${pdu.entityId.site}:${pdu.entityId.application}:${pdu.entityId.entity} is not in the mapping`);
      return;
    }
    this.silent(nowMs, s);
    s.lastHeardMs = nowMs;
    if (!s.run) {
      s.runs++;
      const track = s.runs === 1 ? s.entry.track : `${s.entry.track}-r${s.runs}`;
      s.run = { track, clock: new TrackClock(), ended: false };
      this.stats.runsOpened++;
      this.sink.open(s.entry.vignette, track, s.entry.source);
    }
    const run = s.run;
    if (run.ended) {
      this.stats.pastHorizon++;
      return;
    }
    const reading = run.clock.read(pdu.timestamp, nowMs);
    if (!reading.ok) {
      if (reading.reason === 'not-after') this.stats.notAfter++;
      else this.stats.timeKindChanged++;
      return;
    }
    if (reading.t > s.horizon) {
      this.stats.pastHorizon++;
      run.ended = true;
      this.stats.runsClosed++;
      this.sink.close(s.entry.vignette, run.track, 'horizon');
      return;
    }
    const [x, y, z] = pdu.location;
    const values = convert(s, x, y, z);
    this.stats.points++;
    this.sink.point(s.entry.vignette, run.track, reading.t, values);
  }

  /** Close runs silent for longer than the silence at `nowMs` (only `only`, when given). */
  silent(nowMs: number, only?: EntityState): void {
    const check = (s: EntityState) => {
      if (s.run && nowMs - s.lastHeardMs > this.silenceMs) {
        if (!s.run.ended) {
          this.stats.runsClosed++;
          this.sink.close(s.entry.vignette, s.run.track, 'silence');
        }
        s.run = undefined;
      }
    };
    if (only) check(only);
    else for (const list of this.byId.values()) list.forEach(check);
  }

  /** Close every run still open (the bridge is stopping). */
  closeAll(): void {
    for (const list of this.byId.values()) {
      for (const s of list) {
        if (s.run && !s.run.ended) {
          this.stats.runsClosed++;
          this.sink.close(s.entry.vignette, s.run.track, 'stop');
        }
        s.run = undefined;
      }
    }
  }
}

function convert(s: EntityState, x: number, y: number, z: number): number[] {
  const q = s.entry.quantities;
  if (s.entry.conversion === 'enu') {
    const [east, north, up] = s.frame.enu(x, y, z);
    const by = { east, north, up } as Record<string, number>;
    return q.map((name) => by[name]);
  }
  const rb = s.frame.rangeBearing(x, y, z) as Record<string, number>;
  return q.map((name) => rb[name]);
}

export interface DisSourceOptions {
  /**
   * Address to bind: a unicast address of this host, or 0.0.0.0 / :: for any (needed for broadcast);
   * with `group`, the interface address to join the group on (0.0.0.0 / ::: the system's choice).
   * The port 0 takes any free port.
   */
  readonly host: string;
  readonly port: number;
  /** Multicast group to join (IPv4 224.0.0.0/4 or IPv6 ff00::/8). */
  readonly group?: string;
  /** Where the runs go (connected already). */
  readonly output: RunOutput;
  readonly plan: EventPlan;
  readonly entries: readonly ResolvedEntity[];
  /** Seconds without a PDU after which a run closes. */
  readonly silence?: number;
  readonly onEvent?: (line: string) => void;
  /** Interval of the rate-limited lines about bad PDUs and unmapped entities, ms. */
  readonly noticeIntervalMs?: number;
}

/** Counters of a running source: what it received, and what the service refused, by code. */
export interface DisSourceCounters extends BridgeStats {
  /** The service's refusals (and BUFFER_FULL of the output), by code. */
  readonly refused: Record<string, number>;
}

export interface RunningDisSource {
  /** The bound UDP address and port. */
  readonly address: { address: string; port: number };
  readonly stats: BridgeStats;
  readonly output: RunOutput;
  /** A copy of the counters now. */
  counters(): DisSourceCounters;
  /** Close open runs, wait for the service to confirm (bounded), and release the socket and the output. */
  close(): Promise<void>;
}

/** The output's log line when the service confirms a close (for its `onClosed`). */
export function closedLine(vignette: string, track: string, alreadyClosed: boolean): string {
  return alreadyClosed ? `run ${vignette}/${track} was already closed in the service; its points are not sent` : `run ${vignette}/${track} closed`;
}

/**
 * `performance.now()` less the time the event loop was stalled: a periodic tick that comes more
 * than one period late counts its lateness as stalled time.
 */
export class StallFreeClock {
  private stalled = 0;
  private last: number;

  constructor(
    private readonly periodMs: number,
    private readonly wall: () => number = () => performance.now(),
  ) {
    this.last = wall();
  }

  /** Called every `periodMs`. */
  tick(): void {
    const t = this.wall();
    const late = t - this.last - this.periodMs;
    if (late > this.periodMs) this.stalled += late;
    this.last = t;
  }

  now(): number {
    return this.wall() - this.stalled;
  }
}

/** Start the source: bind the UDP socket (joining the group), route PDUs to the output. */
export async function startDisSource(options: DisSourceOptions): Promise<RunningDisSource> {
  const say = options.onEvent ?? (() => undefined);
  const silence = options.silence ?? BRIDGE_DEFAULTS.silence;
  if (options.group !== undefined && !isMulticast(options.group)) throw new BridgeError('BAD_GROUP', `--group must be a multicast address, got ${JSON.stringify(options.group)}`);
  const family = isIP(options.group ?? options.host) === 6 ? 'udp6' : 'udp4';
  const output = options.output;
  const notices = new CountedLog(say, 'DIS', options.noticeIntervalMs);
  const router = new EntityRouter(options.plan, options.entries, {
    open: (v, t, source) => {
      say(`run ${v}/${t} opened`);
      output.open(v, t, source);
    },
    point: (v, t, time, values) => {
      output.add(v, t, time, values);
    },
    close: (v, t, why) => {
      say(`run ${v}/${t} closing (${why})`);
      output.close(v, t);
    },
  }, silence * 1000, (code, detail) => notices.note(code, detail));

  const checkMs = Math.max(10, Math.min(BRIDGE_DEFAULTS.silenceCheckMs, (silence * 1000) / 4));
  const clock = new StallFreeClock(checkMs);
  const socket: Socket = createSocket({ type: family, reuseAddr: true });
  socket.on('message', (msg) => {
    try {
      router.datagram(msg.length > BRIDGE_DEFAULTS.maxDatagram ? msg.subarray(0, BRIDGE_DEFAULTS.maxDatagram) : msg, clock.now());
    } catch (e) {
      router.stats.bad.INTERNAL = (router.stats.bad.INTERNAL ?? 0) + 1;
      notices.note('INTERNAL', () => `a datagram failed: ${e instanceof Error ? e.message : String(e)}`);
    }
  });
  socket.on('error', (e) => say(`udp: ${e.message}`));
  try {
    await new Promise<void>((res, rej) => {
      socket.once('error', rej);
      // With a group, bind to the any-address (a socket bound to a unicast address does not see
      // datagrams sent to the group) and join on the interface HOST names.
      socket.bind(options.port, options.group !== undefined ? undefined : options.host, () => {
        socket.off('error', rej);
        res();
      });
    });
    if (options.group !== undefined) {
      const iface = options.host === '0.0.0.0' || options.host === '::' ? undefined : options.host;
      socket.addMembership(options.group, iface);
    } else {
      socket.setBroadcast(true);
    }
  } catch (e) {
    socket.close();
    throw new BridgeError('BIND_FAILED', `cannot listen on udp://${options.host}:${options.port}${options.group ? ` (group ${options.group})` : ''}: ${e instanceof Error ? e.message : String(e)}`);
  }
  const flush = setInterval(() => output.pump(), BRIDGE_DEFAULTS.flushMs);
  // Silence is measured on a clock that stops while the process is stalled (a long computation or
  // a collection in the service): a datagram that waited in the socket buffer through a stall is
  // not taken for a silence. The check runs after the loop's I/O phase (setImmediate), so the
  // datagrams that arrived during a stall are routed before it.
  const silenceTimer = setInterval(() => {
    clock.tick();
    setImmediate(() => router.silent(clock.now()));
  }, checkMs);
  const noticeTimer = setInterval(() => notices.flush(), options.noticeIntervalMs ?? COUNTED_LOG_INTERVAL_MS);
  const addr = socket.address();
  say(`listening for DIS Entity State PDUs on udp://${addr.address}:${addr.port}${options.group ? ` (group ${options.group})` : ''}`);
  let closing: Promise<void> | undefined;
  return {
    address: { address: addr.address, port: addr.port },
    stats: router.stats,
    output,
    counters: () => ({ ...router.stats, bad: { ...router.stats.bad }, refused: Object.fromEntries(output.errors) }),
    close: () => {
      closing ??= (async () => {
        clearInterval(flush);
        clearInterval(silenceTimer);
        clearInterval(noticeTimer);
        await new Promise<void>((res) => socket.close(() => res()));
        notices.flush();
        router.closeAll();
        await output.drain();
        output.stop();
      })();
      return closing;
    },
  };
}

/** One line per counter that is not zero, for the end-of-run summary. */
export function formatStats(s: BridgeStats & { refused?: Record<string, number> }): string {
  const bad = Object.entries(s.bad).map(([code, n]) => `${code} ${n}`);
  const refused = Object.entries(s.refused ?? {}).map(([code, n]) => `${code} ${n}`);
  return [
    `${s.datagrams} datagrams, ${s.entityStatePdus} Entity State PDUs, ${s.otherPdus} other PDUs`,
    `${s.points} points in ${s.runsOpened} runs (${s.runsClosed} closed)`,
    `ignored: ${s.unmapped} unmapped, ${s.notAfter} not after the previous stamp, ${s.timeKindChanged} time kind changed, ${s.pastHorizon} past the horizon`,
    `bad PDUs: ${bad.length === 0 ? 'none' : bad.join(', ')}`,
    ...(s.refused ? [`refused by the service: ${refused.length === 0 ? 'none' : refused.join(', ')}`] : []),
  ].join('\n');
}
