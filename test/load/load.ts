/**
 * `npm run load`: a bounded load on the real service (built, `plumbline serve` as a child process),
 * over loopback only. P producers each stream one live run at R Hz for T seconds (one point per
 * message, as a sensor would), D dashboards watch, and optionally one dashboard never reads (its
 * socket is paused) to show it is dropped with a note in the log. Prints, and asserts nothing:
 *
 *   accepted points/s   points acknowledged (journaled) per second of the run
 *   latency             from a point's send to the first dashboard message that reflects it
 *                       (the run's point count, in a `run` or `progress` delta, reaches it;
 *                       timed when the message arrives, before it is parsed), p50 / p99 over
 *                       all dashboards
 *   event-loop delay    of the service process (perf_hooks histogram, from /healthz)
 *   memory              the service process's resident set (its compute worker included):
 *                       at start, peak while loaded, final; sampled every second
 *
 * Flags: --producers P (≤ 500) --hz R (≤ 200) --seconds T (≤ 900) --dashboards D (≤ 100)
 *        --never-reading (add the dashboard that never reads) --json (one JSON line at the end)
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { parseArgs } from 'node:util';
import WebSocket from 'ws';
import { freePort } from '../support/net.js';

export interface LoadOptions {
  readonly producers: number;
  readonly hz: number;
  readonly seconds: number;
  readonly dashboards: number;
  readonly neverReading: boolean;
  readonly log?: (line: string) => void;
}

export interface LoadFigures {
  readonly options: Omit<LoadOptions, 'log'>;
  readonly sent: number;
  readonly acknowledged: number;
  readonly acceptedPerSecond: number;
  readonly errors: number;
  readonly latencyMs: { readonly p50: number; readonly p99: number; readonly samples: number };
  readonly eventLoopMs: { readonly p50: number; readonly p99: number; readonly max: number };
  readonly rssMiB: { readonly start: number; readonly peak: number; readonly final: number; readonly series: number[] };
  readonly droppedNeverReading: boolean;
  readonly serverLog: string[];
}

const ROOT = resolve(import.meta.dirname, '../..');
const CLI = join(ROOT, 'dist', 'ingest', 'cli', 'main.js');
const LIMITS = { producers: 500, hz: 200, seconds: 900, dashboards: 100 };

const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));
const quantile = (sorted: number[], q: number) => (sorted.length ? sorted[Math.min(sorted.length - 1, Math.floor(q * sorted.length))] : Number.NaN);

function connect(url: string): Promise<WebSocket> {
  return new Promise((res, rej) => {
    const ws = new WebSocket(url);
    ws.once('open', () => res(ws));
    ws.once('error', rej);
  });
}

/** One dashboard delta as this harness reads it. */
interface Delta {
  type: string;
  run?: { vignette: string; points: number };
  key?: string;
  points?: number;
}

interface Health {
  eventLoop: { p50Ms: number; p99Ms: number; maxMs: number };
  memory: { rssBytes: number };
}

export async function runLoad(options: LoadOptions): Promise<LoadFigures> {
  for (const [k, max] of Object.entries(LIMITS)) {
    const v = options[k as keyof typeof LIMITS];
    if (!(Number.isInteger(v) && v >= (k === 'dashboards' ? 0 : 1) && v <= max)) throw new RangeError(`--${k} must be an integer in 1..${max} (0..${max} for dashboards), got ${v}`);
  }
  if (!existsSync(CLI)) throw new Error(`${CLI} is missing: run \`npm run build\` first`);
  const log = options.log ?? (() => undefined);
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-load-'));
  const vignettes = Array.from({ length: options.producers }, (_, i) => ({ id: `V${i + 1}`, horizon: options.seconds + 60 }));
  writeFileSync(join(dir, 'plan.json'), JSON.stringify({ name: 'load (invented)', channels: [{ name: 'x', unit: 'm' }, { name: 'y', unit: 'm' }], vignettes }));
  const port = await freePort();
  const serverLog: string[] = [];
  const child = spawn(process.execPath, [CLI, 'serve', '--plan', join(dir, 'plan.json'), '--journal', join(dir, 'journal.sqlite'), '--host', '127.0.0.1', '--port', String(port)], {
    stdio: ['ignore', 'ignore', 'pipe'],
  });
  let stderr = '';
  child.stderr.setEncoding('utf8');
  child.stderr.on('data', (d: string) => {
    stderr += d;
    for (const l of d.split('\n')) if (l.trim()) serverLog.push(l.trim());
  });
  try {
    for (let i = 0; !stderr.includes('is serving'); i++) {
      if (child.exitCode !== null || i > 1200) throw new Error(`the service did not start: ${stderr.slice(-1000)}`);
      await sleep(50);
    }
    const base = `http://127.0.0.1:${port}`;
    const health = async (reset = false) => (await (await fetch(`${base}/healthz${reset ? '?reset' : ''}`)).json()) as Health;
    const mib = (b: number) => Math.round((b / 1048576) * 10) / 10;
    const series: number[] = [mib((await health()).memory.rssBytes)];

    // Dashboards: each update of a run says how many points it has; the first update reaching n
    // gives point n's latency on that dashboard.
    const sentAt: Float64Array[] = Array.from({ length: options.producers }, () => new Float64Array(options.hz * options.seconds + 2));
    const latencies: number[] = [];
    const watchers = await Promise.all(Array.from({ length: options.dashboards }, () => connect(`${base.replace('http', 'ws')}/watch`)));
    for (const w of watchers) {
      const seen = new Int32Array(options.producers);
      w.on('message', (d) => {
        const now = performance.now();
        const m = JSON.parse(d.toString()) as Delta | { type: 'updates'; updates: Delta[] };
        for (const u of 'updates' in m ? m.updates : [m]) {
          // A whole run view, or only its new point count (`progress`, keyed "vignette/track").
          const at = u.type === 'run' && u.run ? { vignette: u.run.vignette, points: u.run.points } : u.type === 'progress' && u.key ? { vignette: u.key.split('/')[0], points: u.points ?? 0 } : undefined;
          if (!at) continue;
          const k = Number(at.vignette.slice(1)) - 1;
          for (let n = seen[k] + 1; n <= at.points; n++) latencies.push(now - sentAt[k][n]);
          seen[k] = Math.max(seen[k], at.points);
        }
      });
    }
    let quiet: WebSocket | undefined;
    if (options.neverReading) {
      quiet = await connect(`${base.replace('http', 'ws')}/watch`);
      (quiet as unknown as { _socket: { pause(): void } })._socket.pause();
    }

    let acknowledged = 0;
    let errors = 0;
    const producers = await Promise.all(Array.from({ length: options.producers }, () => connect(`${base.replace('http', 'ws')}/feed`)));
    producers.forEach((ws, k) => {
      ws.on('message', (d) => {
        const r = JSON.parse(d.toString()) as { type: string; accepted?: number };
        if (r.type === 'ack') acknowledged += r.accepted ?? 0;
        else if (r.type === 'error') errors++;
      });
      ws.send(JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: `V${k + 1}`, track: 'load', source: 'live', channels: ['x', 'y'] }));
    });
    await sleep(300);
    await health(true);
    const start = performance.now();
    let sent = 0;
    const memTimer = setInterval(() => {
      void health().then((h) => series.push(mib(h.memory.rssBytes)), () => undefined);
    }, 1000);
    let lastReport = start;
    await new Promise<void>((done) => {
      let tick = 0;
      const timer = setInterval(() => {
        const now = performance.now();
        const due = Math.min(options.hz * options.seconds, Math.floor(((now - start) / 1000) * options.hz));
        for (; tick < due; tick++) {
          const seq = tick + 1;
          producers.forEach((ws, k) => {
            sentAt[k][seq] = performance.now();
            ws.send(JSON.stringify({ v: 1, type: 'points', id: `p${seq}`, vignette: `V${k + 1}`, track: 'load', points: [{ seq, t: tick / options.hz, values: [1000 + Math.sin(tick / 25) * 50, 2000 - tick * 0.1] }] }));
            sent++;
          });
        }
        if (now - lastReport > 10_000) {
          lastReport = now;
          log(`${((now - start) / 1000).toFixed(0)} s: ${acknowledged.toLocaleString('en')} points acknowledged, resident ${series[series.length - 1]} MiB`);
        }
        if (tick >= options.hz * options.seconds) {
          clearInterval(timer);
          done();
        }
      }, 2);
    });
    for (let i = 0; i < 100 && acknowledged < sent; i++) await sleep(50);
    const elapsed = (performance.now() - start) / 1000;
    const h = await health();
    clearInterval(memTimer);
    series.push(mib(h.memory.rssBytes));
    await sleep(1200);
    latencies.sort((a, b) => a - b);
    const droppedNeverReading = serverLog.some((l) => l.includes('dropping a dashboard'));
    for (const ws of [...producers, ...watchers]) ws.close();
    quiet?.terminate();
    return {
      options: { producers: options.producers, hz: options.hz, seconds: options.seconds, dashboards: options.dashboards, neverReading: options.neverReading },
      sent,
      acknowledged,
      acceptedPerSecond: Math.round(acknowledged / elapsed),
      errors,
      latencyMs: { p50: Math.round(quantile(latencies, 0.5) * 10) / 10, p99: Math.round(quantile(latencies, 0.99) * 10) / 10, samples: latencies.length },
      eventLoopMs: { p50: h.eventLoop.p50Ms, p99: h.eventLoop.p99Ms, max: h.eventLoop.maxMs },
      rssMiB: { start: series[0], peak: Math.max(...series), final: series[series.length - 1], series },
      droppedNeverReading,
      serverLog,
    };
  } finally {
    if (child.exitCode === null) {
      const exited = new Promise<void>((r) => child.once('exit', () => r()));
      child.kill('SIGTERM');
      await exited;
    }
    rmSync(dir, { recursive: true, force: true });
  }
}

export function formatFigures(f: LoadFigures): string {
  const o = f.options;
  return [
    `load: ${o.producers} producers × ${o.hz} Hz for ${o.seconds} s, ${o.dashboards} dashboards${o.neverReading ? ' + 1 that never reads' : ''} (loopback)`,
    `accepted: ${f.acknowledged.toLocaleString('en')} of ${f.sent.toLocaleString('en')} points acknowledged = ${f.acceptedPerSecond.toLocaleString('en')} points/s; ${f.errors} errors`,
    `latency, point sent → dashboard update: p50 ${f.latencyMs.p50} ms, p99 ${f.latencyMs.p99} ms (${f.latencyMs.samples.toLocaleString('en')} samples)`,
    `event-loop delay of the service: p50 ${f.eventLoopMs.p50} ms, p99 ${f.eventLoopMs.p99} ms, max ${f.eventLoopMs.max} ms`,
    `service resident memory: start ${f.rssMiB.start} MiB, peak ${f.rssMiB.peak} MiB, final ${f.rssMiB.final} MiB`,
    ...(o.neverReading ? [`dashboard that never reads: ${f.droppedNeverReading ? 'dropped; the log says: ' + (f.serverLog.find((l) => l.includes('dropping a dashboard')) ?? '') : 'NOT dropped'}`] : []),
  ].join('\n');
}

if (process.argv[1] && resolve(process.argv[1]) === resolve(import.meta.filename)) {
  const { values } = parseArgs({
    options: {
      producers: { type: 'string', default: '50' },
      hz: { type: 'string', default: '50' },
      seconds: { type: 'string', default: '20' },
      dashboards: { type: 'string', default: '20' },
      'never-reading': { type: 'boolean', default: false },
      json: { type: 'boolean', default: false },
    },
  });
  const f = await runLoad({
    producers: Number(values.producers),
    hz: Number(values.hz),
    seconds: Number(values.seconds),
    dashboards: Number(values.dashboards),
    neverReading: values['never-reading'] === true,
    log: (l) => console.log(l),
  });
  console.log(formatFigures(f));
  if (values.json) console.log(JSON.stringify({ ...f, serverLog: undefined }));
}
