/**
 * `plumbline gather`: one dashboard for an event spread over several monitors.
 *
 *   results stream (every run's final result, every monitor's announcement; last value per subject)
 *     → the event combined across shards (./results.ts, the engine's combination, as one process)
 *   each announced monitor's GET /api/state → its vignettes and runs
 *     → one EventView: the owners' vignette and run views, the event combination and timeline from
 *       the results, per-vignette verdicts Holm-adjusted over the whole plan, the logs merged
 *
 * HTTP: GET /api/state (the merged view), /api/combined (the combination alone, with its inputs'
 * count), /api/runs/<vignette>/<run> (passed to the monitor that owns the vignette), /api/plan,
 * /healthz, and the dashboard's static files; WebSocket /watch sends the merged view as a snapshot
 * whenever it changes (checked every `refreshMs`). Notes are written on a monitor's dashboard.
 * Not merged: the anytime-valid evidence of the event (each vignette's is shown, from its monitor).
 */
import { createReadStream, existsSync, statSync } from 'node:fs';
import { createServer, type ServerResponse } from 'node:http';
import { extname, join, normalize, resolve } from 'node:path';
import { jetstream, DeliverPolicy, type ConsumerMessages } from '@nats-io/jetstream';
import type { NatsConnection } from '@nats-io/transport-node';
import { WebSocketServer, type WebSocket } from 'ws';
import type { EventPlan } from '../plan.js';
import type { EventView, LogEntryView, RunView, VignetteView } from '../service/view.js';
import { ensureStreams } from './streams.js';
import { combinedView, combineShards, timelineOf, type MonitorAnnouncement, type RunResult } from './results.js';
import { resultsStream, type Layout } from './subjects.js';

export interface GatherOptions {
  readonly nc: NatsConnection;
  readonly layout: Layout;
  readonly host?: string;
  readonly port?: number;
  readonly staticDir?: string;
  readonly refreshMs?: number;
  readonly log?: (line: string) => void;
}

export interface Gatherer {
  readonly url: string;
  /** The merged view of the event now. */
  state(): Promise<EventView>;
  /** Results received so far (one per final run). */
  results(): readonly RunResult[];
  monitors(): readonly MonitorAnnouncement[];
  close(): Promise<void>;
}

const MIME: Record<string, string> = { '.html': 'text/html; charset=utf-8', '.js': 'text/javascript; charset=utf-8', '.css': 'text/css; charset=utf-8', '.svg': 'image/svg+xml', '.png': 'image/png', '.json': 'application/json' };

async function getJson<T>(url: string): Promise<T> {
  const r = await fetch(url, { signal: AbortSignal.timeout(5000) });
  if (!r.ok) throw new Error(`${url}: HTTP ${r.status}`);
  return (await r.json()) as T;
}

export async function startGatherer(options: GatherOptions): Promise<Gatherer> {
  const { nc, layout } = options;
  const log = options.log ?? (() => undefined);
  await ensureStreams(nc, layout);
  const js = jetstream(nc);
  const results = new Map<string, RunResult>();
  const monitors = new Map<string, MonitorAnnouncement>();
  let version = 0;
  const consumer = await js.consumers.get(resultsStream(layout), { deliver_policy: DeliverPolicy.All });
  const it: ConsumerMessages = await consumer.consume();
  const reading = (async () => {
    for await (const m of it) {
      try {
        const body = m.json<RunResult | MonitorAnnouncement>();
        if (body.kind === 'result') results.set(`${body.vignette}/${body.track}`, body);
        else if (body.kind === 'monitor') {
          monitors.set(body.shard, body);
          log(`gather: monitor ${body.shard} at ${body.monitor} (${body.vignettes.join(', ')})`);
        }
        version++;
      } catch (e) {
        log(`gather: unreadable message on ${m.subject}: ${e instanceof Error ? e.message : String(e)}`);
      }
    }
  })();

  let plan: EventPlan | undefined;
  const planOf = async (): Promise<EventPlan> => {
    if (plan) return plan;
    for (const m of monitors.values()) {
      try {
        plan = await getJson<EventPlan>(`${m.monitor}/api/plan`);
        return plan;
      } catch {
        // try the next monitor
      }
    }
    throw new Error('no monitor has announced itself yet (or none answers)');
  };
  const ownerOf = (vignette: string): MonitorAnnouncement | undefined => [...monitors.values()].filter((m) => m.vignettes.includes(vignette)).sort((a, b) => b.at - a.at)[0];

  // The combination is recomputed only when the results changed.
  let combinedFor = -1;
  let combination: { event?: EventView['combined']; vignettes: ReturnType<typeof combineShards>['vignettes']; timeline: EventView['timeline'] } | undefined;
  const combinationNow = async () => {
    const p = await planOf();
    if (!combination || combinedFor !== version) {
      const all = [...results.values()];
      const c = combineShards(p, all);
      combination = {
        event: c.event ? { ...combinedView(c.event), alpha: p.analysis.alpha, distinguishable: c.event.pValue <= p.analysis.alpha } : undefined,
        vignettes: c.vignettes,
        timeline: timelineOf(p, all),
      };
      combinedFor = version;
    }
    return combination;
  };

  const state = async (): Promise<EventView> => {
    const p = await planOf();
    const c = await combinationNow();
    const shards = [...monitors.values()];
    const views = await Promise.all(shards.map((m) => getJson<EventView>(`${m.monitor}/api/state`).then((v) => ({ m, v }), () => undefined)));
    const live = views.filter((x): x is { m: MonitorAnnouncement; v: EventView } => x !== undefined);
    if (live.length === 0) throw new Error('no monitor answers');
    const vignettes: VignetteView[] = p.vignettes.map((pv) => {
      const owner = live.find((x) => ownerOf(pv.id)?.shard === x.m.shard) ?? live[0];
      const base = owner.v.vignettes.find((v) => v.id === pv.id) as VignetteView;
      const mine = c.vignettes.find((v) => v.id === pv.id);
      return { ...base, adjustedPValue: mine?.adjustedPValue, verdict: mine?.verdict ?? 'not judged' };
    });
    const runs: RunView[] = live.flatMap((x) => x.v.runs.filter((r) => ownerOf(r.vignette)?.shard === x.m.shard));
    const logs: LogEntryView[] = live
      .flatMap((x) => x.v.log.filter((e) => !e.vignette || ownerOf(e.vignette)?.shard === x.m.shard))
      .sort((a, b) => a.at - b.at)
      .map((e, i) => ({ ...e, id: i + 1 }));
    const unwritable = live.find((x) => !x.v.journal.writable);
    return {
      plan: live[0].v.plan,
      vignettes,
      runs,
      combined: c.event,
      timeline: c.timeline,
      evidence: undefined,
      log: logs,
      cautions: live[0].v.cautions,
      journal: unwritable ? unwritable.v.journal : live[0].v.journal,
      gathered: live.map((x) => ({ shard: x.m.shard, url: x.m.monitor })),
    };
  };

  const staticRoot = options.staticDir && existsSync(options.staticDir) ? resolve(options.staticDir) : undefined;
  const sendJson = (res: ServerResponse, status: number, body: unknown) => {
    res.writeHead(status, { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' });
    res.end(JSON.stringify(body));
  };
  const server = createServer((req, res) => {
    void (async () => {
      const path = new URL(req.url ?? '/', 'http://localhost').pathname;
      try {
        if (path === '/api/state') return sendJson(res, 200, await state());
        if (path === '/api/plan') return sendJson(res, 200, await planOf());
        if (path === '/api/combined') {
          const c = await combinationNow();
          return sendJson(res, 200, { combined: c.event, vignettes: c.vignettes.map((v) => ({ id: v.id, combined: v.combined, adjustedPValue: v.adjustedPValue, verdict: v.verdict })), runs: results.size, monitors: [...monitors.values()] });
        }
        if (path === '/healthz') return sendJson(res, 200, { ok: true, monitors: monitors.size, results: results.size });
        const run = /^\/api\/runs\/([^/]+)\/([^/]+)$/.exec(path);
        if (run) {
          const owner = ownerOf(decodeURIComponent(run[1]));
          if (!owner) return sendJson(res, 404, { error: 'NOT_FOUND', reason: `no monitor owns vignette ${decodeURIComponent(run[1])}` });
          const r = await fetch(`${owner.monitor}${path}`, { signal: AbortSignal.timeout(5000) });
          res.writeHead(r.status, { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' });
          return res.end(await r.text());
        }
        if (path.startsWith('/api/')) return sendJson(res, 404, { error: 'NOT_FOUND', reason: `no endpoint ${path}` });
        if (!staticRoot) {
          res.writeHead(200, { 'content-type': 'text/plain; charset=utf-8' });
          return res.end('plumbline gather is running. The dashboard is not built: run `npm run build`.\n');
        }
        const rel = normalize(decodeURIComponent(path === '/' ? '/index.html' : path)).replace(/^([/\\])+/, '');
        const file = join(staticRoot, rel);
        if (!file.startsWith(staticRoot) || !existsSync(file) || !statSync(file).isFile()) return sendJson(res, 404, { error: 'NOT_FOUND', reason: `no file ${path}` });
        res.writeHead(200, { 'content-type': MIME[extname(file)] ?? 'application/octet-stream', 'x-content-type-options': 'nosniff' });
        createReadStream(file).pipe(res);
      } catch (e) {
        sendJson(res, 503, { error: 'UNAVAILABLE', reason: e instanceof Error ? e.message : String(e) });
      }
    })();
  });

  // /watch: the merged view as a snapshot, again whenever it changes.
  const wss = new WebSocketServer({ noServer: true, maxPayload: 64 * 1024, perMessageDeflate: false });
  const watchers = new Set<WebSocket>();
  let last = '';
  server.on('upgrade', (req, socket, head) => {
    socket.on('error', () => socket.destroy());
    if (new URL(req.url ?? '/', 'http://localhost').pathname !== '/watch') {
      socket.write('HTTP/1.1 404 Not Found\r\nConnection: close\r\n\r\n');
      return socket.destroy();
    }
    wss.handleUpgrade(req, socket, head, (ws) => {
      watchers.add(ws);
      ws.on('error', () => undefined);
      ws.on('close', () => watchers.delete(ws));
      ws.on('message', (data) => {
        let id: string | undefined;
        let type: unknown;
        try {
          const m = JSON.parse(data.toString()) as { id?: unknown; type?: unknown };
          id = typeof m.id === 'string' ? m.id : undefined;
          type = m.type;
        } catch {
          // answered below
        }
        ws.send(JSON.stringify(type === 'ping' && id ? { v: 1, type: 'pong', id } : { v: 1, type: 'error', id, code: 'NOT_PERMITTED', reason: 'the gathered view is read-only: write notes on the dashboard of the monitor that owns the vignette' }));
      });
      if (last) ws.send(last);
    });
  });
  let refreshing = false;
  const refresh = async () => {
    if (refreshing || monitors.size === 0) return;
    refreshing = true;
    try {
      const text = JSON.stringify({ type: 'snapshot', state: await state() });
      if (text !== last) {
        last = text;
        for (const ws of watchers) if (ws.readyState === ws.OPEN) ws.send(text);
      }
    } catch {
      // no monitor answers yet; try again
    } finally {
      refreshing = false;
    }
  };
  const timer = setInterval(() => void refresh(), options.refreshMs ?? 1000);

  await new Promise<void>((res, rej) => {
    server.once('error', rej);
    server.listen(options.port ?? 0, options.host ?? '127.0.0.1', () => res());
  });
  const a = server.address();
  const port = typeof a === 'object' && a ? a.port : 0;
  return {
    url: `http://${options.host ?? '127.0.0.1'}:${port}`,
    state,
    results: () => [...results.values()],
    monitors: () => [...monitors.values()],
    async close() {
      clearInterval(timer);
      for (const ws of watchers) ws.terminate();
      wss.close();
      await new Promise<void>((r) => server.close(() => r()));
      server.closeAllConnections();
      await it.close();
      await reading;
    },
  };
}
