/**
 * A stand-in for `plumbline serve` that produces the dashboard's load without the statistics: an
 * invented event of `vignettes` vignettes, each with one live run in flight forever (its track time
 * wraps at the horizon), `sims` simulated runs per vignette in every run detail, and `rate` updates
 * per second per run on /watch. It serves the built dashboard, /api/state, /api/runs/:v/:t and
 * /watch with the shapes of ingest/service/view.ts. Numbers come from a seeded generator.
 * Loopback only; it stops with close().
 */
import { createReadStream, existsSync, statSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import { extname, join, normalize } from 'node:path';
import { WebSocketServer, type WebSocket } from 'ws';
import type { EventView, LogEntryView, RunDetail, RunView, VignetteView, WatchMessage } from '../../../ingest/service/view.js';

export interface SyntheticOptions {
  readonly staticDir: string;
  readonly vignettes?: number;
  readonly sims?: number;
  /** Updates per second per run. */
  readonly rate?: number;
  /** Track seconds per wall second. */
  readonly speed?: number;
  /** Present the event as a gathered view of these monitors (EventView.gathered). */
  readonly gathered?: ReadonlyArray<{ readonly shard: string; readonly url: string }>;
}

export interface SyntheticServer {
  readonly url: string;
  /** Counts of what was served. */
  readonly served: { details: number; messages: number; connections: number };
  /** Cut every dashboard's socket (as a network drop would). */
  dropWatchers(): void;
  close(): Promise<void>;
}

const HORIZON = 360;
const GRID = 128;
const MIME: Record<string, string> = { '.html': 'text/html; charset=utf-8', '.js': 'text/javascript; charset=utf-8', '.map': 'application/json' };

/** Mulberry32: a small seeded generator for invented numbers. */
function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export async function startSyntheticServer(options: SyntheticOptions): Promise<SyntheticServer> {
  const V = options.vignettes ?? 20;
  const N = options.sims ?? 500;
  const rate = options.rate ?? 10;
  const speed = options.speed ?? 40;
  const grid = Array.from({ length: GRID }, (_, i) => (HORIZON * i) / (GRID - 1));
  const range = (t: number) => 2500 - 6 * t + 0.004 * t * t;
  const bearing = (t: number) => 120 + 30 / (1 + Math.exp(-(t - 200) / 15));
  const truth = [range, bearing];
  const sd = [40, 2];
  const started = Date.now();
  const vignettes: VignetteView[] = Array.from({ length: V }, (_, i) => ({
    id: `V${String(i + 1).padStart(2, '0')}`,
    label: `synthetic condition ${i + 1}`,
    horizon: HORIZON,
    condition: { seaState: ['low', 'moderate', 'high'][i % 3], lane: (i % 4) + 1 },
    baseline: { status: 'ready', sims: N, components: 3, varianceExplained: 0.95 },
    verdict: 'not judged',
  }));
  const runs = new Map<string, RunView>();
  for (const v of vignettes) {
    const key = `${v.id}/live-1`;
    runs.set(key, { key, vignette: v.id, track: 'live-1', source: 'live', status: 'in-flight', points: 0, lastT: 0, openedAt: started, flags: [], notes: 0 });
  }
  const log: LogEntryView[] = [];
  let logId = 0;
  const served = { details: 0, messages: 0, connections: 0 };
  const lastTOf = (index: number) => ((((Date.now() - started) / 1000) * speed + index * 17) % HORIZON);

  const runView = (index: number): RunView => {
    const v = vignettes[index];
    const key = `${v.id}/live-1`;
    const lastT = lastTOf(index);
    const upTo = Math.floor(lastT / 10) * 10;
    const base = runs.get(key) as RunView;
    const p = Math.max(1 / (N + 1), Math.min(1, ((index * 37 + Math.floor(upTo)) % (N + 1)) / (N + 1)));
    const r: RunView = {
      ...base,
      lastT,
      points: Math.floor(lastT * 2),
      judgement:
        upTo >= 10
          ? {
              kind: 'provisional',
              upTo,
              pValues: { l2: p, score: Math.min(1, p * 1.3), residual: Math.min(1, p * 0.7 + 0.1), overall: Math.min(1, p * 1.5) },
              statistics: { l2: 20 + index, score: 1.5 + index / 10, residual: 5 + index / 5 },
              simsUsed: N,
              components: 3,
              flags: upTo < HORIZON ? ['partial'] : [],
              rms: [50, 2],
            }
          : undefined,
    };
    runs.set(key, r);
    return r;
  };

  const state = (): EventView => ({
    plan: { name: 'Synthetic load (invented)', alpha: 0.05, combination: 'fisher', channels: [{ name: 'range', unit: 'm' }, { name: 'bearing', unit: 'deg' }] },
    vignettes,
    runs: vignettes.map((_, i) => runView(i)),
    timeline: [],
    log: log.slice(-500),
    cautions: ['Synthetic data for a load test.'],
    journal: { writable: true },
    ...(options.gathered ? { gathered: options.gathered } : {}),
  });

  /** Deterministic noise in (-1.7, 1.7) for index i of stream k (what the real server sends does not change between fetches either). */
  const noise = (k: number, i: number) => {
    const r = rng(k * 100_003 + i);
    return (r() + r() + r() - 1.5) * 2;
  };
  const detail = (vignette: string): RunDetail | undefined => {
    const index = vignettes.findIndex((v) => v.id === vignette);
    if (index < 0) return undefined;
    const run = runView(index);
    const lastT = run.lastT;
    const rawT: number[] = [];
    for (let t = 0; t <= lastT; t += 0.5) rawT.push(t);
    const envelope = truth.map((f, c) => {
      const mean = grid.map(f);
      const band = (z: number, level: number) => ({ level, lower: mean.map((m) => m - z * sd[c]), upper: mean.map((m) => m + z * sd[c]) });
      return { mean, bands: [band(0.674, 0.5), band(1.645, 0.9), band(2.576, 0.99)], simultaneous: { ...band(3.2, 0.95) } };
    });
    const judged = grid.map((t) => t <= (run.judgement?.upTo ?? 0));
    return {
      run,
      channels: [{ name: 'range', unit: 'm' }, { name: 'bearing', unit: 'deg' }],
      raw: { t: rawT, values: truth.map((f, c) => rawT.map((t, i) => f(t) + sd[c] * 0.5 * noise(index * 10 + c, i))) },
      grid,
      smoothed: truth.map((f, c) => grid.map((t) => f(t) + sd[c] * 0.3)),
      judged,
      texture: Array.from({ length: 8 }, (_, k) => truth.map((f, c) => grid.map((t, i) => f(t) + sd[c] * 0.5 * noise(1000 + index * 100 + k * 2 + c, i >> 4)))),
      envelope,
      projection: { from: lastT, level: 0.9, mean: truth.map((f) => grid.map(f)), lower: truth.map((f, c) => grid.map((t) => f(t) - 1.6 * sd[c])), upper: truth.map((f, c) => grid.map((t) => f(t) + 1.6 * sd[c])) },
      // Scores and reference values change only with a new judgement (every 10 s of track time).
      scores: {
        sims: [Array.from({ length: N }, (_, i) => 12 * noise(run.judgement?.upTo ?? 0, i)), Array.from({ length: N }, (_, i) => 5 * noise(7 + (run.judgement?.upTo ?? 0), i))],
        trail: Array.from({ length: Math.floor(lastT / 10) }, (_, k) => [10 * (k + 1), noise(index, k) * 12, noise(index + 50, k) * 5] as [number, number, number]),
        eigenvalues: [400, 64],
      },
      reference: {
        l2: Array.from({ length: N }, (_, i) => Math.abs(20 + 5 * noise(3 + (run.judgement?.upTo ?? 0), i))),
        score: Array.from({ length: N }, (_, i) => Math.abs(1.5 + 0.3 * noise(4 + (run.judgement?.upTo ?? 0), i))),
        residual: Array.from({ length: N }, (_, i) => Math.abs(5 + 1.2 * noise(5 + (run.judgement?.upTo ?? 0), i))),
      },
      log: [],
    };
  };

  const root = normalize(options.staticDir);
  const http: Server = createServer((req, res) => {
    const path = new URL(req.url ?? '/', 'http://localhost').pathname;
    const json = (status: number, body: unknown) => {
      res.writeHead(status, { 'content-type': 'application/json', 'cache-control': 'no-store' });
      res.end(JSON.stringify(body));
    };
    if (path === '/api/state') return json(200, state());
    const m = /^\/api\/runs\/([^/]+)\/([^/]+)$/.exec(path);
    if (m) {
      served.details++;
      const d = detail(decodeURIComponent(m[1]));
      return d ? json(200, d) : json(404, { error: 'NOT_FOUND', reason: 'no run' });
    }
    const file = join(root, normalize(path === '/' ? '/index.html' : path).replace(/^([/\\])+/, ''));
    if (!file.startsWith(root) || !existsSync(file) || !statSync(file).isFile()) return json(404, { error: 'NOT_FOUND', reason: path });
    res.writeHead(200, { 'content-type': MIME[extname(file)] ?? 'application/octet-stream' });
    createReadStream(file).pipe(res);
  });
  const wss = new WebSocketServer({ server: http, path: '/watch' });
  const clients = new Set<WebSocket>();
  const send = (ws: WebSocket, m: WatchMessage) => {
    if (ws.readyState === ws.OPEN) {
      ws.send(JSON.stringify(m));
      served.messages++;
    }
  };
  wss.on('connection', (ws) => {
    served.connections++;
    ws.on('error', () => undefined);
    clients.add(ws);
    ws.on('close', () => clients.delete(ws));
    send(ws, { type: 'snapshot', state: state() });
  });
  let tick = 0;
  const timer = setInterval(() => {
    tick++;
    for (let i = 0; i < V; i++) {
      const r = runView(i);
      for (const ws of clients) send(ws, { type: 'run', run: r });
    }
    if (tick % rate === 0) {
      const entry: LogEntryView = { id: ++logId, at: Date.now(), kind: 'event', vignette: vignettes[tick % V].id, track: 'live-1', t: lastTOf(tick % V), text: `synthetic log entry ${logId}` };
      log.push(entry);
      if (log.length > 2000) log.splice(0, log.length - 500);
      for (const ws of clients) send(ws, { type: 'log', entry });
    }
  }, 1000 / rate);

  await new Promise<void>((r) => http.listen(0, '127.0.0.1', () => r()));
  const address = http.address();
  const port = typeof address === 'object' && address ? address.port : 0;
  return {
    url: `http://127.0.0.1:${port}`,
    served,
    dropWatchers() {
      for (const ws of clients) ws.terminate();
    },
    async close() {
      clearInterval(timer);
      for (const ws of clients) ws.terminate();
      wss.close();
      http.closeAllConnections();
      await new Promise<void>((r) => http.close(() => r()));
    },
  };
}
