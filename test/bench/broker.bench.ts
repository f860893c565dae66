/**
 * Broker benchmark: `npm run bench:broker`. Prints figures; asserts nothing about time.
 *
 * A nats-server with JetStream on loopback (test/support/broker.ts), monitors as their own
 * processes (`plumbline serve --broker … --shard …`, built), each with its own journal, 8
 * vignettes split evenly between them. Invented tracks: 2 channels sampled at 2 Hz.
 *   1. Throughput, 2 and 4 monitors: 32 runs × 5,000 points (160,000 points, messages of 50
 *      points) published by 32 producers as fast as the broker stores them (each with up to 32
 *      publishes awaiting the broker's acknowledgement); points per second from
 *      the first publish to the last point journaled by the monitors (read from their /api/state).
 *   2. Latency and a restart, 2 monitors: the 32 runs at 20× their 2 Hz pace (1,280 points/s,
 *      messages of 5 points); one monitor is killed (SIGKILL) 8 s in and started again. The
 *      monitors report, for each message, the time from the broker storing it to the service's
 *      journaled acknowledgement (50th and 99th percentiles). Then every journal is compared with
 *      what was published: points lost and doubled.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import type { RawTrack } from '../../engine/types.js';
import { Journal } from '../../ingest/service/journal.js';
import { publishTracks } from '../../ingest/broker/publisher.js';
import { connectBroker, ensureStreams } from '../../ingest/broker/streams.js';
import { startBroker } from '../support/broker.js';
import { freePort } from '../support/net.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-bbench-'));
const VIGNETTES = Array.from({ length: 8 }, (_, i) => `V${i + 1}`);
const planPath = join(dir, 'plan.json');
writeFileSync(planPath, JSON.stringify({ name: 'broker benchmark (invented)', channels: [{ name: 'x', unit: 'm' }, { name: 'y', unit: 'm' }], vignettes: VIGNETTES.map((id) => ({ id, horizon: 100_000 })) }));
const plan = { channels: [{ name: 'x' }, { name: 'y' }] };

function tracks(runsPerVignette: number, points: number): RawTrack[] {
  const out: RawTrack[] = [];
  for (const v of VIGNETTES) {
    for (let r = 0; r < runsPerVignette; r++) {
      const t = Float64Array.from({ length: points }, (_, i) => i * 0.5);
      out.push({ vignette: v, track: `run-${r + 1}`, t, values: [t.map((x) => 2500 - 5 * x + r), t.map((x) => 100 + Math.sin(x / 20))] });
    }
  }
  return out;
}

interface MonitorProc {
  child: ChildProcess;
  port: number;
  out: string;
  vignettes: string[];
  journal: string;
}

async function startMonitor(m: Omit<MonitorProc, 'child' | 'out'>, broker: string, event: string): Promise<MonitorProc> {
  const child = spawn(process.execPath, ['dist/ingest/cli/main.js', 'serve', '--plan', planPath, '--journal', m.journal, '--port', String(m.port), '--broker', broker, '--shard', m.vignettes.join(','), '--event', event], { stdio: ['ignore', 'ignore', 'pipe'] });
  const proc: MonitorProc = { ...m, child, out: '' };
  child.stderr?.on('data', (d: Buffer) => (proc.out += d.toString()));
  const until = Date.now() + 60_000;
  while (!/broker: shard .* reading/.test(proc.out)) {
    if (child.exitCode !== null || Date.now() > until) throw new Error(`monitor did not start: ${proc.out}`);
    await new Promise((r) => setTimeout(r, 50));
  }
  return proc;
}

async function stop(m: MonitorProc): Promise<void> {
  const exited = new Promise((r) => m.child.once('exit', r));
  m.child.kill('SIGTERM');
  await exited;
}

async function journaledPoints(ms: readonly MonitorProc[]): Promise<number> {
  let n = 0;
  for (const m of ms) {
    const s = (await (await fetch(`http://127.0.0.1:${m.port}/api/state`)).json()) as { runs: Array<{ points: number }> };
    for (const r of s.runs) n += r.points;
  }
  return n;
}

async function monitors(count: number, broker: string, event: string): Promise<MonitorProc[]> {
  const per = VIGNETTES.length / count;
  const out: MonitorProc[] = [];
  for (let i = 0; i < count; i++) out.push(await startMonitor({ port: await freePort(), vignettes: VIGNETTES.slice(i * per, (i + 1) * per), journal: join(dir, `${event}-${i}.sqlite`) }, broker, event));
  return out;
}

const load = () => loadavg().map((x) => x.toFixed(2)).join(' ');

async function main(): Promise<void> {
  const broker = await startBroker();
  const nc = await connectBroker(broker.url, 'broker bench');
  console.log(`broker bench: nats-server on ${broker.url}; load average at start ${load()}`);
  try {
    // 1. Throughput.
    const flood = tracks(4, 5000);
    const total = flood.reduce((s, t) => s + t.t.length, 0);
    for (const count of [2, 4]) {
      const event = `throughput-${count}`;
      await ensureStreams(nc, { prefix: 'plumbline', event });
      const ms = await monitors(count, broker.url, event);
      const started = performance.now();
      await publishTracks(nc, flood, { layout: { prefix: 'plumbline', event }, plan, overlap: flood.length, pointsPerMessage: 50, window: 32 });
      const published = performance.now();
      while ((await journaledPoints(ms)) < total) await new Promise((r) => setTimeout(r, 100));
      const done = performance.now();
      console.log(`throughput, ${count} monitors: ${total} points (${total / 50} messages) in ${((done - started) / 1000).toFixed(2)} s = ${Math.round(total / ((done - started) / 1000))} points/s end to end (publishing alone ${((published - started) / 1000).toFixed(2)} s); load average ${load()}`);
      for (const m of ms) await stop(m);
    }

    // 2. Latency at a range's pace, with a monitor killed and restarted.
    const event = 'paced';
    const layout = { prefix: 'plumbline', event };
    await ensureStreams(nc, layout);
    const paced = tracks(4, 1200);
    const ms = await monitors(2, broker.url, event);
    const publishing = publishTracks(nc, paced, { layout, plan, overlap: paced.length, pointsPerMessage: 5, speed: 20 });
    await new Promise((r) => setTimeout(r, 8000));
    ms[0].child.kill('SIGKILL');
    await new Promise((r) => ms[0].child.once('exit', r));
    const restartedAt = performance.now();
    ms[0] = await startMonitor(ms[0], broker.url, event);
    console.log(`restart: monitor 1 killed (SIGKILL) 8 s in, reading the broker again after ${((performance.now() - restartedAt) / 1000).toFixed(2)} s; ${/resumes at stream message \d+ \((\d+) delivered/.exec(ms[0].out)?.[1] ?? 'no'} messages delivered to it before the kill were unacknowledged`);
    await publishing;
    const want = paced.reduce((s, t) => s + t.t.length, 0);
    while ((await journaledPoints(ms)) < want) await new Promise((r) => setTimeout(r, 100));
    for (const m of ms) await stop(m);
    for (const [i, m] of ms.entries()) {
      const line = /broker: shard .*publish → journaled ack.*$/m.exec(m.out)?.[0];
      console.log(`latency, monitor ${i + 1}${i === 0 ? ' (after its restart)' : ''}: ${line ?? '(no summary)'}`);
    }
    let lost = 0;
    let doubled = 0;
    for (const m of ms) {
      const j = Journal.open(m.journal);
      const ids = new Map(j.tracks().map((t) => [t.id, `${t.vignette}/${t.track}`]));
      const seen = new Map<string, Set<number>>();
      j.eachPoint((p) => {
        const k = ids.get(p.trackId) as string;
        let s = seen.get(k);
        if (!s) seen.set(k, (s = new Set()));
        if (s.has(p.seq)) doubled++;
        s.add(p.seq);
      });
      j.close();
      for (const t of paced.filter((x) => m.vignettes.includes(x.vignette))) {
        const s = seen.get(`${t.vignette}/${t.track}`);
        for (let q = 1; q <= t.t.length; q++) if (!s?.has(q)) lost++;
      }
    }
    console.log(`across the restart: ${want} points published at 20× a 2 Hz pace (${(paced.length * 2 * 20).toFixed(0)} points/s), ${lost} lost, ${doubled} doubled; load average ${load()}`);
  } finally {
    await nc.drain();
    await broker.stop();
    rmSync(dir, { recursive: true, force: true });
  }
}

main().catch((e: unknown) => {
  console.error(e);
  process.exitCode = 1;
});
