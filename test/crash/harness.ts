/**
 * Crash harness: the real service (`node dist/ingest/cli/main.js serve`, a child process) is killed
 * with SIGKILL at random moments while producers stream, while it loads its baseline, and while its
 * worker refits a model; it is started again on the same journal each time. Each producer is its
 * own connection and resumes from the server's committed sequence number after every restart.
 *
 * Checks (each a failure in `CrashSummary.problems`):
 * - after every restart, the resume point the server gives a producer is never behind the last
 *   acknowledgement that producer received (nothing acknowledged is lost);
 * - at the end the journal holds every point of every track exactly once (seq 1..n, no gaps, no
 *   duplicates), with the time and values that were sent;
 * - the per-run p-values and the combined p-value equal those of an uninterrupted batch assessment
 *   of the same files (`assessEvent`, the path of `plumbline assess`).
 *
 * Randomness: the kill moments come from a seeded generator (the harness's own, not the engine's).
 * Used by `npm run crash` (test/crash/crash.ts, the full version) and by the CI test
 * (test/crash/crash.test.ts, a short version).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import { join, resolve } from 'node:path';
import Database from 'better-sqlite3';
import WebSocket from 'ws';
import { assessEvent } from '../../engine/event.js';
import { createRng } from '../../engine/rng.js';
import { freePort } from '../support/net.js';
import type { RawTrack } from '../../engine/types.js';
import { writeDemoFiles } from '../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../ingest/plan.js';
import type { AssessmentReport } from '../../ingest/report.js';
import { readTracks } from '../../ingest/tracks-reader.js';

export const ROOT = resolve(import.meta.dirname, '../..');
const CLI = join(ROOT, 'dist', 'ingest', 'cli', 'main.js');

export interface CrashOptions {
  readonly dir: string;
  /** SIGKILLs while the producers stream. */
  readonly streamKills: number;
  /** SIGKILLs while the service starts (reading and fitting its baseline, restoring the journal). */
  readonly loadKills: number;
  /** SIGKILLs while the worker refits a model from simulated runs sent over the feed. */
  readonly refitKills: number;
  readonly seed?: number;
  readonly simsPerVignette?: number;
  readonly liveRunsPerVignette?: number;
  /** Track-time seconds per wall second of each live producer. */
  readonly speed?: number;
  readonly log?: (line: string) => void;
}

export interface CrashSummary {
  readonly kills: { stream: number; load: number; refit: number };
  readonly producers: number;
  readonly points: number;
  /** Wall time from spawning the service to its "serving" line, each restart, ms. */
  readonly restartMs: number[];
  /** Times a producer's resume point was ahead of its last acknowledgement (acked before, lost the ack in the kill). */
  readonly resumedAhead: number;
  readonly reconnects: number;
  readonly problems: string[];
}

const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

/** The service as a child process. */
class Service {
  child?: ChildProcess;
  ready = false;
  stderr = '';
  constructor(
    readonly args: string[],
    readonly port: number,
  ) {}

  /** Spawn; resolves at once (use `waitReady`). */
  start(): void {
    this.ready = false;
    this.stderr = '';
    const child = spawn(process.execPath, [CLI, 'serve', ...this.args, '--port', String(this.port)], { stdio: ['ignore', 'ignore', 'pipe'] });
    child.stderr?.setEncoding('utf8');
    child.stderr?.on('data', (d: string) => {
      this.stderr += d;
      if (this.stderr.length > 100_000) this.stderr = this.stderr.slice(-50_000);
      if (this.stderr.includes('plumbline is serving')) this.ready = true;
    });
    this.child = child;
  }

  async waitReady(timeoutMs = 120_000): Promise<void> {
    const end = Date.now() + timeoutMs;
    while (!this.ready) {
      if (this.child?.exitCode !== null && this.child?.exitCode !== undefined) throw new Error(`the service exited with ${this.child.exitCode}:\n${this.stderr.slice(-2000)}`);
      if (Date.now() > end) throw new Error(`the service was not ready within ${timeoutMs} ms:\n${this.stderr.slice(-2000)}`);
      await sleep(10);
    }
  }

  async kill(signal: NodeJS.Signals = 'SIGKILL'): Promise<void> {
    const c = this.child;
    if (!c || c.exitCode !== null || c.signalCode !== null) return;
    const exited = new Promise<void>((r) => c.once('exit', () => r()));
    c.kill(signal);
    await exited;
  }
}

/** One producer: one track over its own connection, resuming from the server's committed point. */
class Producer {
  lastAck = 0;
  closed = false;
  reconnects = 0;
  resumedAhead = 0;
  readonly problems: string[] = [];
  private startedAt = 0;
  private ws?: WebSocket;

  constructor(
    readonly url: string,
    readonly track: RawTrack,
    readonly source: 'live' | 'sim',
    readonly channels: string[],
    /** Track seconds per wall second; Infinity sends as fast as acknowledgements allow. */
    readonly speed: number,
  ) {}

  get n(): number {
    return this.track.t.length;
  }

  async run(deadline: number): Promise<void> {
    this.startedAt = Date.now();
    while (!this.closed) {
      if (Date.now() > deadline) {
        this.problems.push(`${this.track.vignette}/${this.track.track}: not finished by the deadline (acknowledged ${this.lastAck} of ${this.n})`);
        return;
      }
      const ws = await this.connect();
      if (!ws) {
        await sleep(50);
        continue;
      }
      await this.session(ws);
      if (!this.closed) this.reconnects++;
    }
  }

  private connect(): Promise<WebSocket | undefined> {
    return new Promise((res) => {
      const ws = new WebSocket(this.url);
      ws.once('open', () => res(ws));
      ws.once('error', () => res(undefined));
    });
  }

  /** One connection's life: open (learn the resume point), stream, close. Ends when the socket does. */
  private session(ws: WebSocket): Promise<void> {
    this.ws = ws;
    const { vignette, track } = this.track;
    let next = -1; // unknown until `opened`
    let inFlight = 0;
    let msg = 0;
    let closeSent = false;
    const WINDOW = 8;
    const BATCH = 50;
    const send = (o: Record<string, unknown>) => ws.readyState === WebSocket.OPEN && ws.send(JSON.stringify({ v: 1, id: `m${++msg}`, vignette, track, ...o }));
    const pump = () => {
      if (next < 0 || this.closed) return;
      const elapsed = ((Date.now() - this.startedAt) / 1000) * this.speed;
      while (inFlight < WINDOW && next < this.n && this.track.t[next] <= elapsed) {
        const points = [];
        for (let i = next; i < Math.min(this.n, next + BATCH) && this.track.t[i] <= elapsed; i++) {
          points.push({ seq: i + 1, t: this.track.t[i], values: this.track.values.map((v) => v[i]) });
        }
        send({ type: 'points', points });
        next += points.length;
        inFlight++;
      }
      if (this.lastAck === this.n && !closeSent) {
        closeSent = true;
        send({ type: 'close', lastSeq: this.n });
      }
    };
    return new Promise<void>((done) => {
      const timer = setInterval(pump, 20);
      ws.on('message', (d) => {
        const r = JSON.parse(d.toString()) as Record<string, unknown>;
        if (r.type === 'opened') {
          const c = Number(r.committedSeq);
          if (c < this.lastAck) this.problems.push(`${vignette}/${track}: resumed at ${c} after ${this.lastAck} points were acknowledged`);
          if (c > this.lastAck) this.resumedAhead++;
          this.lastAck = Math.max(this.lastAck, c);
          next = c;
          if (r.closed === true) this.closed = true;
        } else if (r.type === 'ack') {
          inFlight--;
          this.lastAck = Math.max(this.lastAck, Number(r.committedSeq));
        } else if (r.type === 'closed') {
          this.closed = true;
          ws.close();
        } else if (r.type === 'error') {
          inFlight--;
          this.problems.push(`${vignette}/${track}: ${String(r.code)}: ${String(r.reason)}`);
        }
        pump();
      });
      ws.on('error', () => undefined);
      ws.on('close', () => {
        clearInterval(timer);
        done();
      });
      send({ type: 'open', source: this.source, channels: this.channels });
    });
  }

  stop(): void {
    this.closed = true;
    this.ws?.terminate();
  }
}

async function getJson<T>(url: string): Promise<T> {
  const r = await fetch(url);
  if (!r.ok) throw new Error(`${url}: ${r.status}`);
  return (await r.json()) as T;
}

/** Jobs the service's compute worker has queued or running (from /healthz). */
async function workerJobs(base: string): Promise<number> {
  const h = await getJson<{ queue: { ordered: number; provisional: number; busy: boolean } }>(`${base}/healthz`);
  return h.queue.ordered + h.queue.provisional + (h.queue.busy ? 1 : 0);
}

/** Wait until every live run is judged final and the worker is idle. */
async function settled(base: string, liveRuns: number, timeoutMs = 90_000): Promise<void> {
  const end = Date.now() + timeoutMs;
  for (;;) {
    try {
      const state = await getJson<{ runs: Array<{ status: string; judgement?: { kind: string } }> }>(`${base}/api/state`);
      const done = state.runs.filter((r) => r.status === 'complete' && r.judgement?.kind === 'final').length;
      if (done === liveRuns && (await workerJobs(base)) === 0) {
        await sleep(300);
        if ((await workerJobs(base)) === 0) return;
      }
    } catch {
      // not up yet
    }
    if (Date.now() > end) {
      const state = await getJson<{ runs: Array<{ key: string; status: string; judgement?: { kind: string } }>; vignettes: Array<{ id: string; baseline: { status: string; sims: number } }> }>(`${base}/api/state`).catch(() => undefined);
      const runs = state?.runs.map((r) => `${r.key}:${r.status}:${r.judgement?.kind ?? '-'}`).join(' ');
      const vignettes = state?.vignettes.map((v) => `${v.id}:${v.baseline.status}:${v.baseline.sims}`).join(' ');
      throw new Error(`the service did not settle within ${timeoutMs} ms: runs ${runs}; baselines ${vignettes}; worker jobs ${await workerJobs(base).catch(() => '?')}`);
    }
    await sleep(100);
  }
}

/** Compare the service's export with the batch assessment, run by run. */
function compareResults(report: AssessmentReport, expected: ReturnType<typeof assessEvent>, problems: string[]): void {
  if (report.runs.length !== expected.runs.length) problems.push(`results: ${report.runs.length} runs, expected ${expected.runs.length}`);
  expected.runs.forEach((run, i) => {
    const got = report.runs[i];
    const p = run.assessment?.result.pValues;
    const want = [p?.overall, p?.l2, p?.score, p?.residual];
    const have = [got?.overall?.pValue, got?.statistics?.l2.pValue, got?.statistics?.score.pValue, got?.statistics?.residual.pValue];
    if (`${got?.vignette}/${got?.track}` !== `${run.vignette}/${run.track}` || want.some((w, k) => w !== have[k])) {
      problems.push(`results: ${run.vignette}/${run.track}: p-values ${JSON.stringify(have)}, uninterrupted ${JSON.stringify(want)}`);
    }
  });
  if (report.combined?.pValue !== expected.combined?.pValue) problems.push(`results: combined p ${report.combined?.pValue}, uninterrupted ${expected.combined?.pValue}`);
}

/** Every point of every track exactly once, as sent. */
function checkJournal(path: string, tracks: ReadonlyArray<{ track: RawTrack; order: number[] }>, problems: string[]): void {
  const db = new Database(path, { readonly: true });
  try {
    const ids = new Map((db.prepare('SELECT id, vignette, track FROM tracks').all() as Array<{ id: number; vignette: string; track: string }>).map((r) => [`${r.vignette}/${r.track}`, r.id]));
    const rows = db.prepare('SELECT seq, t, v FROM points WHERE track_id = ? ORDER BY seq');
    for (const { track, order } of tracks) {
      const key = `${track.vignette}/${track.track}`;
      const id = ids.get(key);
      if (id === undefined) {
        problems.push(`journal: no track ${key}`);
        continue;
      }
      const got = rows.all(id) as Array<{ seq: number; t: number; v: Buffer }>;
      if (got.length !== track.t.length) problems.push(`journal: ${key} has ${got.length} points, ${track.t.length} were sent`);
      for (let i = 0; i < Math.min(got.length, track.t.length); i++) {
        const r = got[i];
        const v = new Float64Array(r.v.buffer.slice(r.v.byteOffset, r.v.byteOffset + r.v.byteLength));
        // The journal keeps values in the plan's channel order; `order[c]` is the plan index of sent channel c.
        const same = r.seq === i + 1 && r.t === track.t[i] && track.values.every((vals, c) => vals[i] === v[order[c]]);
        if (!same) {
          problems.push(`journal: ${key} point ${i + 1} differs (seq ${r.seq}, t ${r.t})`);
          break;
        }
      }
    }
  } finally {
    db.close();
  }
}

export async function runCrash(options: CrashOptions): Promise<CrashSummary> {
  const log = options.log ?? (() => undefined);
  if (!existsSync(CLI)) throw new Error(`${CLI} is missing: run \`npm run build\` first`);
  const generator = createRng(options.seed ?? 1);
  const random = (): number => generator.uniform();
  const speed = options.speed ?? 20;
  const files = await writeDemoFiles(join(options.dir, 'event'), { seed: options.seed ?? 1, simsPerVignette: options.simsPerVignette ?? 40, liveRunsPerVignette: options.liveRunsPerVignette ?? 1 });
  const plan: EventPlan = await loadPlan(files.plan);
  const channels = plan.channels.map((c) => c.name);
  const live = (await readTracks(files.live, plan)).tracks;
  const sims = (await readTracks(files.baseline, plan)).tracks;
  const expected = assessEvent(plan.vignettes, plan.channels, plan.analysis, sims, live);
  const problems: string[] = [];
  const restartMs: number[] = [];
  const identity = channels.map((_, i) => i);
  let resumedAhead = 0;
  let reconnects = 0;

  // ---- Part 1: baseline from the file; kills while streaming and while starting.
  const port = await freePort();
  const base = `http://127.0.0.1:${port}`;
  const journal1 = join(options.dir, 'stream.sqlite');
  const svc = new Service(['--plan', files.plan, '--baseline', files.baseline, '--journal', journal1], port);
  const services: Service[] = [svc];
  try {
    const startTimed = async () => {
      const t0 = Date.now();
      svc.start();
      await svc.waitReady();
      restartMs.push(Date.now() - t0);
    };
    await startTimed();
    const deadline = Date.now() + 30 * 60_000;
    const producers = live.map((t) => new Producer(`ws://127.0.0.1:${port}/feed`, t, 'live', channels, speed));
    const running = producers.map((p) => p.run(deadline));
    let stream = 0;
    let load = 0;
    // Every `every`-th restart after a stream kill is itself killed during start-up first.
    const every = options.loadKills > 0 ? Math.max(1, Math.floor(options.streamKills / options.loadKills)) : Infinity;
    for (let k = 0; k < options.streamKills; k++) {
      await sleep(200 + random() * 1800);
      if (producers.every((p) => p.closed)) {
        log(`kill ${k + 1}: the producers have finished; no more kills while streaming`);
        break;
      }
      await svc.kill();
      stream++;
      const acked = producers.reduce((a, p) => a + p.lastAck, 0);
      log(`kill ${stream}/${options.streamKills} while streaming (${acked} points acknowledged so far)`);
      if (load < options.loadKills && k % every === 0) {
        const typical = restartMs.reduce((a, b) => a + b, 0) / restartMs.length;
        for (let attempt = 0; attempt < 5; attempt++) {
          svc.start();
          await sleep(Math.max(5, (0.1 + 0.7 * random()) * typical));
          const wasReady = svc.ready;
          await svc.kill();
          if (!wasReady) {
            load++;
            log(`kill ${load}/${options.loadKills} during start-up (reading the baseline, fitting, restoring the journal)`);
            break;
          }
        }
      }
      await startTimed();
    }
    await Promise.all(running);
    await settled(base, live.length);
    compareResults(await getJson<AssessmentReport>(`${base}/api/export`), expected, problems);
    await svc.kill('SIGTERM');
    for (const p of producers) {
      problems.push(...p.problems);
      resumedAhead += p.resumedAhead;
      reconnects += p.reconnects;
    }
    checkJournal(journal1, live.map((track) => ({ track, order: identity })), problems);

    // ---- Part 2: the baseline arrives as simulated runs over the feed; kills during refits.
    let refit = 0;
    if (options.refitKills > 0) {
      const journal2 = join(options.dir, 'refit.sqlite');
      const svc2 = new Service(['--plan', files.plan, '--journal', journal2], port);
      services.push(svc2);
      svc2.start();
      await svc2.waitReady();
      const simProducers = sims.map((t) => new Producer(`ws://127.0.0.1:${port}/feed`, t, 'sim', channels, Number.POSITIVE_INFINITY));
      const queue = [...simProducers];
      // One at a time: the order the simulated runs are added in is the order of the file.
      const lanes = Array.from({ length: 1 }, async () => {
        for (let p = queue.shift(); p; p = queue.shift()) await p.run(deadline);
      });
      const allSent = Promise.all(lanes);
      let sent = false;
      void allSent.then(() => (sent = true));
      while (refit < options.refitKills && !sent) {
        // The worker has a job (adding simulated runs or a refit): kill then.
        const jobs = await workerJobs(base).catch(() => 0);
        if (jobs > 0) {
          await svc2.kill();
          refit++;
          log(`kill ${refit}/${options.refitKills} while the worker had ${jobs} job(s) (adding simulated runs, refitting)`);
          svc2.start();
          await svc2.waitReady();
        } else {
          await sleep(5 + random() * 20);
        }
      }
      await allSent;
      for (const p of simProducers) {
        problems.push(...p.problems);
        reconnects += p.reconnects;
      }
      const liveProducers = live.map((t) => new Producer(`ws://127.0.0.1:${port}/feed`, t, 'live', channels, Number.POSITIVE_INFINITY));
      await Promise.all(liveProducers.map((p) => p.run(deadline)));
      for (const p of liveProducers) problems.push(...p.problems);
      await settled(base, live.length);
      compareResults(await getJson<AssessmentReport>(`${base}/api/export`), expected, problems);
      await svc2.kill('SIGTERM');
      checkJournal(journal2, [...sims, ...live].map((track) => ({ track, order: identity })), problems);
    }

    return {
      kills: { stream, load, refit },
      producers: producers.length,
      points: live.reduce((a, t) => a + t.t.length, 0),
      restartMs,
      resumedAhead,
      reconnects,
      problems,
    };
  } finally {
    for (const x of services) await x.kill();
  }
}
