/**
 * `plumbline serve`: one process with HTTP and WebSocket.
 *
 *   /feed   WebSocket for producers (open, points, close, note)
 *   /watch  WebSocket for dashboards: a snapshot, then conflated deltas; may send notes only
 *   GET /api/state, /api/runs/:vignette/:track, /api/export, /api/debrief.zip, /api/plan, /api/schema/protocol, /healthz
 *   GET /   the dashboard's static files (when built)
 *
 * Pipeline: socket frames → parse (never throws) → EventService.receive (validate, stage) →
 * batchPerTurn → EventService.flush (one journal transaction, then acks) ; EventService.changes$
 * → latestPerKeyPerWindow (`dashboardWindowMs`, latest per key) → one `updates` message,
 * serialised once, to every watcher that keeps up; a watcher over `slowClientBytes` unsent is
 * skipped and sent a fresh snapshot when it has caught up, or dropped if it stays behind.
 *
 * Security defaults: loopback bind; binding elsewhere requires a producer token; producers must
 * present it (Authorization: Bearer, or ?token=); browser connections must come from an allowed
 * origin; frames larger than `maxPayload` close the connection (1009); a flooding peer is closed
 * (1008). Every socket has an 'error' listener: a bad peer never takes the server down.
 */
import { createReadStream, existsSync, statSync } from 'node:fs';
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { Duplex } from 'node:stream';
import { extname, join, normalize, resolve } from 'node:path';
import { timingSafeEqual } from 'node:crypto';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { Subject } from 'rxjs';
import { WebSocketServer, type WebSocket } from 'ws';
import { loadPlan, type EventPlan } from '../plan.js';
import { Assessor } from './assessor.js';
import { readBaseline } from './baseline-cache.js';
import { FitCacheStore } from './fit-cache.js';
import { zipInWorker } from '../debrief/offthread.js';
import { fromService } from '../debrief/source.js';
import { EventService, type Change, type Role } from './event-service.js';
import { Journal, JournalError } from './journal.js';
import { DEFAULT_LIMITS, type ServiceLimits } from './limits.js';
import { batchPerTurn, latestPerKeyPerWindow } from './operators.js';
import { errorReply, parseClientMessage, protocolJsonSchema, type ClientMessage, type ServerReply } from './protocol.js';
import type { Source } from './source.js';
import type { WatchMessage, WatchUpdate } from './view.js';

export interface ServeOptions {
  readonly host?: string;
  readonly port?: number;
  /** Plan file; may be omitted when the journal already holds the plan. */
  readonly planPath?: string;
  readonly plan?: EventPlan;
  readonly baselinePath?: string;
  readonly journalPath: string;
  /** Producer token; required when binding to a non-loopback address. */
  readonly token?: string;
  /** Allowed Origin values for browser connections (the server's own origin is always allowed). */
  readonly allowedOrigins?: readonly string[];
  readonly staticDir?: string;
  readonly limits?: Partial<ServiceLimits>;
  readonly durability?: 'normal' | 'full';
  /** Run the statistics on the main thread (tests); the default is a worker thread. */
  readonly inProcessCompute?: boolean;
  readonly refitDelayMs?: number;
  /** Keep fitted baselines in the journal and load them on start when they still match (./fit-cache.ts); default on. */
  readonly fitCache?: boolean;
  readonly log?: (line: string) => void;
  readonly onProgress?: (label: string, done: number, total: number) => void;
  /** In-process sources (./source.ts), started once the server listens and stopped when it closes. */
  readonly sources?: readonly Source[];
}

export interface RunningServer {
  readonly url: string;
  readonly port: number;
  readonly host: string;
  readonly service: EventService;
  readonly journal: Journal;
  /**
   * An in-process source's entry: a producer message it built itself, taken through the same
   * batch → validate → journal → acknowledge path as a `/feed` frame. `reply` gets the ack or error.
   */
  submit(message: ClientMessage, reply: (r: ServerReply) => void): void;
  /** Start an in-process source with `submit`, list it in /healthz and stop it on close (./source.ts). */
  addSource(source: Source): Promise<void>;
  /** The sources started so far, in start order. */
  readonly sources: readonly Source[];
  close(): Promise<void>;
}

export class ServeError extends Error {
  constructor(readonly code: 'PORT_IN_USE' | 'TOKEN_REQUIRED' | 'PLAN_REQUIRED' | 'PLAN_MISMATCH' | 'LISTEN_FAILED' | 'SOURCE_FAILED', message: string) {
    super(message);
    this.name = 'ServeError';
  }
}

const LOOPBACK = new Set(['127.0.0.1', 'localhost', '::1']);

const MIME: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.json': 'application/json',
  '.svg': 'image/svg+xml',
  '.png': 'image/png',
  '.map': 'application/json',
};

interface Watcher {
  readonly ws: WebSocket;
  /** Since when its socket buffer has been over the limit (it missed updates: a snapshot follows). */
  behindSince?: number;
}

function canonicalPlan(plan: EventPlan): string {
  return JSON.stringify(plan);
}

function sameToken(given: string | undefined, expected: string): boolean {
  if (given === undefined) return false;
  const a = Buffer.from(given);
  const b = Buffer.from(expected);
  return a.length === b.length && timingSafeEqual(a, b);
}

/** An event rebuilt from a journal: the service, its computation, the plan. */
export interface OpenedEvent {
  readonly plan: EventPlan;
  readonly service: EventService;
  readonly assessor: Assessor;
}

/**
 * Rebuild the event held by a journal, as the service does on start: the plan (from the options,
 * checked against the journal's, or the journal's own), the baseline file (given, or the one the
 * journal recorded), then every track, result and log entry (EventService.restore). Used by
 * `startServer` and by the debrief of a journal file (on a private copy of the journal).
 */
export async function openEvent(
  journal: Journal,
  options: Pick<ServeOptions, 'plan' | 'planPath' | 'baselinePath' | 'inProcessCompute' | 'refitDelayMs' | 'onProgress' | 'journalPath' | 'fitCache'> & { limits: ServiceLimits; log?: (line: string) => void },
): Promise<OpenedEvent> {
  const log = options.log ?? (() => undefined);
  const limits = options.limits;
  let assessor: Assessor | undefined;
  try {
    // The plan: from the file, checked against the journal's when it has one.
    const stored = journal.getMeta('plan');
    let plan = options.plan ?? (options.planPath ? await loadPlan(options.planPath) : undefined);
    if (!plan) {
      if (!stored) throw new ServeError('PLAN_REQUIRED', 'no event plan: give --plan (the journal is new)');
      plan = JSON.parse(stored) as EventPlan;
    } else if (stored && stored !== canonicalPlan(plan)) {
      throw new ServeError('PLAN_MISMATCH', `the journal ${options.journalPath} was written under another plan; use a new journal or the original plan`);
    }
    journal.setMeta('plan', canonicalPlan(plan));

    assessor = new Assessor(
      { vignettes: plan.vignettes, channels: plan.channels, analysis: plan.analysis, provisionalStep: limits.provisionalStep },
      { inProcess: options.inProcessCompute, cache: options.fitCache === false ? undefined : new FitCacheStore(journal, log) },
    );
    const service = new EventService({ plan, journal, assessor, limits, refitDelayMs: options.refitDelayMs });

    const baselinePath = options.baselinePath ?? journal.getMeta('baselineFile');
    if (baselinePath) {
      if (!existsSync(baselinePath)) throw new ServeError('PLAN_REQUIRED', `the baseline file ${baselinePath} (recorded in the journal) is missing`);
      const read = await readBaseline(journal, baselinePath, plan, { onProgress: (d, t) => options.onProgress?.('reading the baseline', d, t), log, cache: options.fitCache !== false });
      journal.setMeta('baselineFile', resolve(baselinePath));
      await service.loadBaseline(read.tracks, read.report, { fit: false });
      log(`baseline: ${read.report.accepted} points in ${read.report.tracks} simulated tracks from ${baselinePath}${read.fromCache ? ' (from the journal\'s cache of the file)' : ''}`);
    }
    const restored = await service.restore(options.onProgress, log);
    if (restored.tracks > 0) log(`journal: restored ${restored.tracks} tracks and ${restored.points} points from ${options.journalPath}`);
    return { plan, service, assessor };
  } catch (e) {
    await assessor?.close();
    throw e;
  }
}

export async function startServer(options: ServeOptions): Promise<RunningServer> {
  const limits: ServiceLimits = { ...DEFAULT_LIMITS, ...options.limits };
  const host = options.host ?? '127.0.0.1';
  const log = options.log ?? (() => undefined);
  if (!LOOPBACK.has(host) && !options.token) {
    throw new ServeError('TOKEN_REQUIRED', `binding to ${host} exposes the feed beyond this machine: give a producer token (PLUMBLINE_TOKEN or --token-file)`);
  }

  const journal = Journal.open(options.journalPath, { durability: options.durability });
  let opened: OpenedEvent;
  try {
    opened = await openEvent(journal, { ...options, limits, log });
  } catch (e) {
    journal.close();
    throw e;
  }
  const { service } = opened;
  const svc = service;
  const worker = opened.assessor;
  const activePlan = JSON.parse(journal.getMeta('plan') as string) as EventPlan;

  // ------------------------------------------------------------- HTTP
  const staticRoot = options.staticDir && existsSync(options.staticDir) ? resolve(options.staticDir) : undefined;
  const sendJson = (res: ServerResponse, status: number, body: unknown) => {
    const text = JSON.stringify(body);
    res.writeHead(status, { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' });
    res.end(text);
  };
  // The debrief package of the event so far, zipped; built on a worker thread, one at a time.
  let debriefQueue: Promise<unknown> = Promise.resolve();
  const sendDebrief = (res: ServerResponse) => {
    const input = fromService(svc, { kind: 'service', name: `plumbline service (${activePlan.name})` });
    const job = debriefQueue.then(() => zipInWorker(input));
    debriefQueue = job.catch(() => undefined);
    job.then(
      (zip) => {
        res.writeHead(200, {
          'content-type': 'application/zip',
          'content-disposition': 'attachment; filename="plumbline-debrief.zip"',
          'content-length': String(zip.byteLength),
          'cache-control': 'no-store',
        });
        res.end(zip);
      },
      (e: unknown) => sendJson(res, 500, { error: 'INTERNAL', reason: e instanceof Error ? e.message : String(e) }),
    );
  };
  const decode = (s: string): string | undefined => {
    try {
      return decodeURIComponent(s);
    } catch {
      return undefined;
    }
  };
  const handleHttp = (req: IncomingMessage, res: ServerResponse) => {
    try {
      const url = new URL(req.url ?? '/', 'http://localhost');
      if (decode(url.pathname) === undefined) return sendJson(res, 400, { error: 'BAD_REQUEST', reason: `the path ${url.pathname.slice(0, 200)} is not valid percent-encoding` });
      if (req.method !== 'GET' && req.method !== 'HEAD') return sendJson(res, 405, { error: 'METHOD_NOT_ALLOWED', reason: 'read-only endpoints: use GET' });
      const path = url.pathname;
      if (path === '/api/state') return sendJson(res, 200, svc.snapshot());
      if (path === '/api/export') return sendJson(res, 200, svc.exportReport());
      if (path === '/api/plan') return sendJson(res, 200, activePlan);
      if (path === '/api/debrief.zip') return sendDebrief(res);
      if (path === '/api/schema/protocol') return sendJson(res, 200, protocolJsonSchema());
      if (path === '/healthz') {
        const j = svc.journalStatus();
        const mem = process.memoryUsage();
        const ms = (ns: number) => Math.round(ns / 1e4) / 100;
        const eventLoop = { p50Ms: ms(loopDelay.percentile(50)), p99Ms: ms(loopDelay.percentile(99)), maxMs: ms(loopDelay.max) };
        if (url.searchParams.has('reset')) loopDelay.reset();
        return sendJson(res, 200, { ok: !worker.broken && j.writable, worker: worker.broken?.message ?? 'running', journal: j, queue: worker.queued, sqlite: journal.sqliteVersion, eventLoop, memory: { rssBytes: mem.rss, heapUsedBytes: mem.heapUsed }, sources: sources.map((s) => ({ name: s.name, counters: s.counters() })) });
      }
      const run = /^\/api\/runs\/([^/]+)\/([^/]+)$/.exec(path);
      if (run) {
        const d = svc.detail(decodeURIComponent(run[1]), decodeURIComponent(run[2]));
        return d ? sendJson(res, 200, d) : sendJson(res, 404, { error: 'NOT_FOUND', reason: `no run ${decodeURIComponent(run[1])}/${decodeURIComponent(run[2])}` });
      }
      if (path.startsWith('/api/')) return sendJson(res, 404, { error: 'NOT_FOUND', reason: `no endpoint ${path}` });
      if (!staticRoot) {
        res.writeHead(200, { 'content-type': 'text/plain; charset=utf-8' });
        return res.end('plumbline is running. The dashboard is not built: run `npm run build`.\n');
      }
      const rel = normalize(decodeURIComponent(path === '/' ? '/index.html' : path)).replace(/^([/\\])+/, '');
      const file = join(staticRoot, rel);
      if (!file.startsWith(staticRoot) || !existsSync(file) || !statSync(file).isFile()) return sendJson(res, 404, { error: 'NOT_FOUND', reason: `no file ${path}` });
      const headers: Record<string, string> = {
        'content-type': MIME[extname(file)] ?? 'application/octet-stream',
        'x-content-type-options': 'nosniff',
        // Built assets carry a content hash in their names; the page itself is always revalidated.
        'cache-control': rel.startsWith('assets/') ? 'public, max-age=31536000, immutable' : 'no-cache',
      };
      if (extname(file) === '.html') {
        headers['content-security-policy'] = "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data:; font-src 'self'; connect-src 'self'; object-src 'none'; base-uri 'self'; form-action 'none'; frame-ancestors 'none'";
      }
      res.writeHead(200, headers);
      createReadStream(file).pipe(res);
    } catch (e) {
      sendJson(res, 500, { error: 'INTERNAL', reason: e instanceof Error ? e.message : String(e) });
    }
  };
  // In-process sources (./source.ts): started after listen, stopped first on close.
  const sources: Source[] = [];
  const server: Server = createServer(handleHttp);
  // Event-loop delay of this process (perf_hooks histogram, ns), reported by /healthz.
  const loopDelay = monitorEventLoopDelay({ resolution: 10 });
  loopDelay.enable();

  // ------------------------------------------------------------- WebSocket
  const wss = new WebSocketServer({ noServer: true, maxPayload: limits.maxPayload, perMessageDeflate: false });
  const watchers = new Set<Watcher>();
  const alive = new WeakMap<WebSocket, boolean>();
  const roles = new WeakMap<WebSocket, Role>();
  // Socket frames arrive as text and are parsed here; in-process sources (`RunningServer.submit`)
  // hand over messages they built and checked themselves. Both go through the same batch and flush.
  const inbound$ = new Subject<{ role: Role; text: string; reply: (r: ServerReply) => void } | { role: Role; message: ClientMessage; reply: (r: ServerReply) => void }>();
  // While a batch is handled, the sockets it replies to are corked: a connection that sent several
  // messages in the batch gets all their replies in one write (one system call, not one per ack).
  let corked: Set<Duplex> | undefined;
  const hold = (socket: Duplex) => {
    if (corked && !corked.has(socket)) {
      socket.cork();
      corked.add(socket);
    }
  };
  const sub = inbound$
    .pipe(batchPerTurn())
    .subscribe((batch) => {
      corked = new Set();
      try {
        for (const m of batch) {
          const parsed = 'text' in m ? parseClientMessage(m.text) : ({ ok: true, message: m.message } as const);
          if (!parsed.ok) m.reply(parsed.error);
          else {
            try {
              svc.receive(m.role, parsed.message, m.reply);
            } catch (e) {
              m.reply(errorReply('INTERNAL', e instanceof Error ? e.message : String(e), parsed.message.id));
            }
          }
        }
        svc.flush();
      } finally {
        const held = corked;
        corked = undefined;
        for (const socket of held) socket.uncork();
      }
    });

  let ownOrigins: string[] = [];
  const allowed = new Set(options.allowedOrigins ?? []);
  const refuse = (socket: Duplex, status: number, text: string) => {
    socket.write(`HTTP/1.1 ${status} ${text}\r\nConnection: close\r\nContent-Type: text/plain\r\n\r\n${text}\n`);
    socket.destroy();
  };
  server.on('upgrade', (req, socket, head) => {
    socket.on('error', () => socket.destroy());
    const url = new URL(req.url ?? '/', 'http://localhost');
    const role: Role | undefined = url.pathname === '/feed' ? 'producer' : url.pathname === '/watch' ? 'watcher' : undefined;
    if (!role) return refuse(socket, 404, 'Not Found');
    const origin = req.headers.origin;
    if (origin !== undefined && !ownOrigins.includes(origin) && !allowed.has(origin)) return refuse(socket, 403, 'Forbidden');
    if (role === 'producer' && options.token) {
      const bearer = /^Bearer (.+)$/.exec(req.headers.authorization ?? '')?.[1] ?? url.searchParams.get('token') ?? undefined;
      if (!sameToken(bearer, options.token)) return refuse(socket, 401, 'Unauthorized');
    }
    wss.handleUpgrade(req, socket, head, (ws) => onConnection(ws, role, socket));
  });

  const send = (ws: WebSocket, msg: unknown) => {
    if (ws.readyState === ws.OPEN) ws.send(JSON.stringify(msg));
  };

  const onConnection = (ws: WebSocket, role: Role, socket: Duplex) => {
    alive.set(ws, true);
    roles.set(ws, role);
    ws.on('pong', () => alive.set(ws, true));
    ws.on('error', (e) => log(`socket error (${role}): ${e.message}`));
    let tokens = limits.messageBurst;
    let last = Date.now();
    let strikes = 0;
    const reply = (r: ServerReply) => {
      hold(socket);
      send(ws, r);
    };
    ws.on('message', (data, isBinary) => {
      const now = Date.now();
      tokens = Math.min(limits.messageBurst, tokens + ((now - last) / 1000) * limits.messagesPerSecond);
      last = now;
      if (tokens < 1) {
        strikes++;
        if (strikes >= limits.floodStrikes) {
          ws.close(1008, 'message flood');
          return;
        }
        return reply(errorReply('RATE_LIMITED', `more than ${limits.messagesPerSecond} messages per second; this message was not processed`));
      }
      tokens -= 1;
      strikes = 0;
      if (isBinary) return reply(errorReply('BAD_MESSAGE', 'binary frames are not part of the protocol; send JSON text'));
      inbound$.next({ role, text: data.toString(), reply });
    });
    if (role === 'watcher') {
      const w: Watcher = { ws };
      watchers.add(w);
      ws.on('close', () => watchers.delete(w));
      send(ws, { type: 'snapshot', state: svc.snapshot() } satisfies WatchMessage);
    }
  };

  // Dashboards: the changes of each short window, the latest per key, serialised once and the
  // same bytes sent to every watcher. A watcher whose socket buffer is over `slowClientBytes` is
  // skipped (marked behind) and sent a fresh snapshot once it has read its backlog; one that stays
  // behind for `slowClientGraceMs` is dropped with a note in the log. Nothing queues per watcher.
  const deliver = (w: Watcher, frame: Buffer | undefined, now: number) => {
    const ws = w.ws;
    if (ws.readyState !== ws.OPEN) return;
    if (ws.bufferedAmount > limits.slowClientBytes) {
      w.behindSince ??= now;
      if (now - w.behindSince > limits.slowClientGraceMs) {
        log(`dropping a dashboard that stopped reading (over ${limits.slowClientBytes} bytes unsent for ${limits.slowClientGraceMs} ms)`);
        ws.terminate();
        watchers.delete(w);
      }
      return;
    }
    if (w.behindSince !== undefined) {
      w.behindSince = undefined;
      ws.send(JSON.stringify({ type: 'snapshot', state: svc.snapshot() } satisfies WatchMessage));
      return;
    }
    if (frame) ws.send(frame, { binary: false });
  };

  const updateFor = (c: Change): WatchUpdate | undefined => {
    switch (c.kind) {
      case 'run': {
        const run = svc.runView(c.key);
        return run ? { type: 'run', run } : undefined;
      }
      case 'progress': {
        const run = svc.runView(c.key);
        return run ? { type: 'progress', key: run.key, points: run.points, lastT: run.lastT } : undefined;
      }
      case 'vignette': {
        const vignette = svc.vignetteView(c.id);
        return vignette ? { type: 'vignette', vignette } : undefined;
      }
      case 'combined': {
        const snap = svc.snapshot();
        return { type: 'combined', combined: snap.combined, timeline: snap.timeline, evidence: snap.evidence };
      }
      case 'log':
        return { type: 'log', entry: c.entry };
      case 'journal':
        return { type: 'journal', journal: svc.journalStatus() };
    }
  };
  const changeKey = (c: Change) => (c.kind === 'run' || c.kind === 'progress' ? `run:${c.key}` : c.kind === 'vignette' ? `vignette:${c.id}` : c.kind === 'log' ? `log:${c.entry.id}` : c.kind === 'journal' ? 'journal' : 'combined');
  // A whole run view covers its progress: never replace a pending 'run' by a 'progress'.
  const keepRun = (kept: Change, next: Change): Change => (kept.kind === 'run' && next.kind === 'progress' ? kept : next);
  const changesSub = svc.changes$.pipe(latestPerKeyPerWindow(changeKey, limits.dashboardWindowMs, { merge: keepRun })).subscribe((changes) => {
    if (watchers.size === 0) return;
    const updates: WatchUpdate[] = [];
    for (const c of changes) {
      const u = updateFor(c);
      if (u) updates.push(u);
    }
    if (updates.length === 0) return;
    const frame = Buffer.from(JSON.stringify({ type: 'updates', updates } satisfies WatchMessage));
    const now = Date.now();
    for (const w of watchers) deliver(w, frame, now);
  });
  // Watchers that fell behind get their snapshot (or are dropped) even while nothing changes.
  const drainTimer = setInterval(() => {
    const now = Date.now();
    for (const w of watchers) if (w.behindSince !== undefined) deliver(w, undefined, now);
  }, 100);
  const heartbeat = setInterval(() => {
    for (const ws of wss.clients) {
      if (alive.get(ws) === false) {
        log(`dropping a ${roles.get(ws) === 'watcher' ? 'dashboard' : 'producer'} connection that stopped reading (no answer to a ping within ${limits.heartbeatMs} ms)`);
        ws.terminate();
        continue;
      }
      alive.set(ws, false);
      ws.ping();
    }
  }, limits.heartbeatMs);

  await new Promise<void>((res, rej) => {
    const onError = (e: NodeJS.ErrnoException) => {
      rej(e.code === 'EADDRINUSE' ? new ServeError('PORT_IN_USE', `port ${options.port ?? 0} on ${host} is already in use: pick another with --port`) : new ServeError('LISTEN_FAILED', `cannot listen on ${host}:${options.port ?? 0}: ${e.message}`));
    };
    server.once('error', onError);
    server.listen(options.port ?? 0, host, () => {
      server.off('error', onError);
      res();
    });
  }).catch(async (e: unknown) => {
    clearInterval(heartbeat);
    clearInterval(drainTimer);
    sub.unsubscribe();
    changesSub.unsubscribe();
    svc.shutdown();
    await worker.close();
    journal.close();
    throw e;
  });
  const address = server.address();
  const port = typeof address === 'object' && address ? address.port : (options.port ?? 0);
  const shownHost = host.includes(':') ? `[${host}]` : host;
  ownOrigins = [`http://${shownHost}:${port}`, `http://localhost:${port}`, `http://127.0.0.1:${port}`];

  let closing: Promise<void> | undefined;
  const running: RunningServer = {
    url: `http://${shownHost}:${port}`,
    port,
    host,
    service: svc,
    journal,
    sources,
    submit(message, reply) {
      inbound$.next({ role: 'producer', message, reply });
    },
    async addSource(source) {
      if (closing) throw new ServeError('SOURCE_FAILED', `the server is closing: source "${source.name}" not started`);
      if (sources.some((s) => s.name === source.name)) throw new ServeError('SOURCE_FAILED', `a source named "${source.name}" is already running`);
      await source.start(running.submit);
      sources.push(source);
    },
    close() {
      closing ??= (async () => {
        // Sources first: they close their runs through submit while the pipeline still runs.
        for (const s of [...sources].reverse()) {
          try {
            await s.stop();
          } catch (e) {
            log(`source ${s.name} did not stop cleanly: ${e instanceof Error ? e.message : String(e)}`);
          }
        }
        loopDelay.disable();
        clearInterval(heartbeat);
        clearInterval(drainTimer);
        for (const ws of wss.clients) ws.terminate();
        wss.close();
        const closed = new Promise<void>((r) => server.close(() => r()));
        server.closeAllConnections();
        await closed;
        sub.unsubscribe();
        changesSub.unsubscribe();
        svc.flush();
        svc.shutdown();
        await worker.close();
        journal.close();
      })();
      return closing;
    },
  };
  for (const s of options.sources ?? []) {
    try {
      await running.addSource(s);
    } catch (e) {
      await running.close();
      throw e;
    }
  }
  return running;
}

export { JournalError };
