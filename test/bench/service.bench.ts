/**
 * Service benchmark: `npm run bench:service`. Prints figures; asserts nothing about time.
 *
 * The server runs as its own process (`plumbline serve`, built), on loopback, with a fresh journal.
 *   1. Throughput: one producer sends 200,000 points of 20 tracks in messages of 500 points, with up
 *      to 64 unacknowledged messages; points per second journaled and acknowledged. Once for
 *      simulated tracks (validation and journal only: a simulation farm streaming a baseline) and
 *      for live tracks (also the data-quality monitor of every point) sampled at 2 Hz and at 50 Hz.
 *   2. Latency: 50 producers at 50 Hz (one point per message) for 20 s, one dashboard on /watch;
 *      for every run update the dashboard receives, the time since the newest point it reflects was
 *      sent. Prints the 50th, 95th and 99th percentiles.
 */
import { execFileSync, spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-sbench-'));
const vignettes = Array.from({ length: 50 }, (_, i) => ({ id: `V${i + 1}`, horizon: 100000 }));
writeFileSync(join(dir, 'plan.json'), JSON.stringify({ name: 'service benchmark', channels: [{ name: 'x', unit: 'm' }, { name: 'y', unit: 'm' }], vignettes }));

/**
 * CPU time of the service's main thread so far, ms (Linux /proc/<pid>/task/<pid>/stat, fields 14
 * and 15: utime and stime in clock ticks; proc(5)). The machine is shared, so wall-clock rates
 * depend on what else runs; points per CPU second of the main thread say what one core does.
 * undefined where /proc is missing.
 */
const TICKS = (() => {
  try {
    return Number(execFileSync('getconf', ['CLK_TCK']).toString().trim()) || 100;
  } catch {
    return 100;
  }
})();
function mainThreadCpuMs(pid: number): number | undefined {
  const file = `/proc/${pid}/task/${pid}/stat`;
  if (!existsSync(file)) return undefined;
  const stat = readFileSync(file, 'utf8');
  const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  // fields[0] is field 3 (state): utime is field 14, stime field 15.
  return ((Number(fields[11]) + Number(fields[12])) / TICKS) * 1000;
}
let serverPid = 0;

async function startServer(port: number): Promise<() => void> {
  // PLUMBLINE_BENCH_NODE_ARGS: options for the service's node, e.g. "--cpu-prof --cpu-prof-dir=prof" to profile it.
  const nodeArgs = (process.env.PLUMBLINE_BENCH_NODE_ARGS ?? '').split(' ').filter(Boolean);
  const child = spawn(process.execPath, [...nodeArgs, 'dist/ingest/cli/main.js', 'serve', '--plan', join(dir, 'plan.json'), '--journal', join(dir, 'journal.sqlite'), '--port', String(port)], { stdio: ['ignore', 'ignore', 'pipe'] });
  await new Promise<void>((res, rej) => {
    let err = '';
    child.stderr.on('data', (d: Buffer) => {
      err += d.toString();
      if (err.includes('is serving')) res();
    });
    child.once('exit', (code) => rej(new Error(`server exited ${code}: ${err}`)));
  });
  serverPid = child.pid ?? 0;
  return () => child.kill('SIGTERM');
}

function connect(url: string): Promise<WebSocket> {
  return new Promise((res, rej) => {
    const ws = new WebSocket(url);
    ws.once('open', () => res(ws));
    ws.once('error', rej);
  });
}

function percentile(sorted: number[], q: number): number {
  return sorted[Math.min(sorted.length - 1, Math.floor(q * sorted.length))];
}

async function throughput(url: string, source: 'sim' | 'live', prefix: string, hz: number): Promise<void> {
  const ws = await connect(url);
  const TRACKS = 20;
  const PER = 10_000;
  const BATCH = 500;
  let inflight = 0;
  let acked = 0;
  let wake: (() => void) | undefined;
  ws.on('message', (d) => {
    const r = JSON.parse(d.toString()) as { type: string; accepted?: number };
    if (r.type === 'ack') {
      acked += r.accepted ?? 0;
      inflight--;
    }
    if (r.type === 'error') console.log('error', r);
    wake?.();
  });
  for (let k = 0; k < TRACKS; k++) ws.send(JSON.stringify({ v: 1, type: 'open', id: `o${k}`, vignette: `V${k + 1}`, track: `${prefix}-bulk`, source, channels: ['x', 'y'] }));
  const start = performance.now();
  const cpuStart = mainThreadCpuMs(serverPid);
  let id = 0;
  for (let k = 0; k < TRACKS; k++) {
    for (let s = 0; s < PER; s += BATCH) {
      while (inflight >= 64) await new Promise<void>((r) => (wake = r));
      const points = Array.from({ length: BATCH }, (_, i) => ({ seq: s + i + 1, t: (s + i) / hz, values: [1000 + s + i, 2000 - i] }));
      ws.send(JSON.stringify({ v: 1, type: 'points', id: `p${id++}`, vignette: `V${k + 1}`, track: `${prefix}-bulk`, points }));
      inflight++;
    }
  }
  while (acked < TRACKS * PER) await new Promise<void>((r) => (wake = r));
  const seconds = (performance.now() - start) / 1000;
  const cpuEnd = mainThreadCpuMs(serverPid);
  const cpu = cpuStart !== undefined && cpuEnd !== undefined ? (cpuEnd - cpuStart) / 1000 : undefined;
  const perCpu = cpu ? `; ${cpu.toFixed(2)} s CPU of the service's main thread = ${Math.round(acked / cpu).toLocaleString('en')} points per CPU second` : '';
  console.log(`throughput (${source} tracks, points ${hz} Hz apart in track time): ${acked} points journaled and acknowledged in ${seconds.toFixed(2)} s = ${Math.round(acked / seconds).toLocaleString('en')} points/s${perCpu}`);
  ws.close();
}

async function latency(base: string): Promise<void> {
  const PRODUCERS = 50;
  const HZ = 50;
  const SECONDS = 20;
  const sentAt = new Map<string, number[]>();
  const watcher = await connect(`${base}/watch`);
  const samples: number[] = [];
  watcher.on('message', (d) => {
    const now = performance.now();
    type Delta = { type: string; run?: { key: string; points: number }; key?: string; points?: number };
    const m = JSON.parse(d.toString()) as Delta | { type: 'updates'; updates: Delta[] };
    for (const u of 'updates' in m ? m.updates : [m]) {
      const at = u.type === 'run' && u.run ? u.run : u.type === 'progress' && u.key ? { key: u.key, points: u.points ?? 0 } : undefined;
      if (!at) continue;
      const sent = sentAt.get(at.key)?.[at.points - 1];
      if (sent !== undefined) samples.push(now - sent);
    }
  });
  const producers = await Promise.all(Array.from({ length: PRODUCERS }, () => connect(`${base}/feed`)));
  producers.forEach((ws, k) => {
    ws.on('message', () => undefined);
    ws.send(JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: `V${k + 1}`, track: 'rate', source: 'live', channels: ['x', 'y'] }));
    sentAt.set(`V${k + 1}/rate`, []);
  });
  await new Promise((r) => setTimeout(r, 300));
  const start = performance.now();
  await new Promise<void>((resolve) => {
    let tick = 0;
    const timer = setInterval(() => {
      const due = Math.floor(((performance.now() - start) / 1000) * HZ);
      for (; tick < due; tick++) {
        producers.forEach((ws, k) => {
          const times = sentAt.get(`V${k + 1}/rate`) as number[];
          times.push(performance.now());
          ws.send(JSON.stringify({ v: 1, type: 'points', id: `p${tick}`, vignette: `V${k + 1}`, track: 'rate', points: [{ seq: tick + 1, t: tick / HZ, values: [tick, -tick] }] }));
        });
      }
      if (performance.now() - start > SECONDS * 1000) {
        clearInterval(timer);
        resolve();
      }
    }, 5);
  });
  await new Promise((r) => setTimeout(r, 1000));
  samples.sort((a, b) => a - b);
  console.log(`latency, ${PRODUCERS} producers at ${HZ} Hz for ${SECONDS} s, point sent → dashboard update: ${samples.length} updates; p50 ${percentile(samples, 0.5).toFixed(1)} ms, p95 ${percentile(samples, 0.95).toFixed(1)} ms, p99 ${percentile(samples, 0.99).toFixed(1)} ms`);
  for (const ws of producers) ws.close();
  watcher.close();
}

async function main(): Promise<void> {
  const port = 17000 + Math.floor(Math.random() * 1000);
  const stop = await startServer(port);
  try {
    // `node dist/test/bench/service.bench.js throughput` (or `latency`) runs only that part.
    const only = process.argv[2];
    if (only !== 'latency') {
      await throughput(`ws://127.0.0.1:${port}/feed`, 'sim', 's', 50);
      // Live runs also pass the data-quality monitor, which holds the last 5 s of track time for
      // reordering: its cost grows with the sampling rate (2 Hz: a radar; 50 Hz: a fast sensor).
      await throughput(`ws://127.0.0.1:${port}/feed`, 'live', 'l2', 2);
      await throughput(`ws://127.0.0.1:${port}/feed`, 'live', 'l50', 50);
    }
    if (only !== 'throughput') await latency(`ws://127.0.0.1:${port}`);
  } finally {
    stop();
    await new Promise((r) => setTimeout(r, 500));
    rmSync(dir, { recursive: true, force: true });
  }
}

await main();
