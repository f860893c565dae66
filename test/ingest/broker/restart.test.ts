/**
 * A shard monitor (`plumbline serve --broker … --shard …`, its own process) killed with SIGKILL
 * while producers publish, and started again on the same journal: it resumes from its durable
 * consumers, and its journal ends up holding exactly what was published for its vignettes, each
 * point and each note once.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { jetstream } from '@nats-io/jetstream';
import type { NatsConnection } from '@nats-io/transport-node';
import { afterAll, beforeAll, expect, it } from 'vitest';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan } from '../../../ingest/plan.js';
import { Journal } from '../../../ingest/service/journal.js';
import { readTracks } from '../../../ingest/tracks-reader.js';
import { publishMessage, publishTracks } from '../../../ingest/broker/publisher.js';
import { connectBroker, ensureStreams } from '../../../ingest/broker/streams.js';
import type { Layout } from '../../../ingest/broker/subjects.js';
import { startBroker, type TestBroker } from '../../support/broker.js';
import { freePort } from '../../support/net.js';
import { journalPoints, publishedPoints, waitFor } from './support.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-broker-restart-'));
let broker: TestBroker;
let nc: NatsConnection;
beforeAll(async () => {
  broker = await startBroker();
  nc = await connectBroker(broker.url, 'restart test');
}, 30_000);
afterAll(async () => {
  await nc?.drain();
  await broker?.stop();
  rmSync(dir, { recursive: true, force: true });
});

function monitorProcess(args: string[]): { child: ChildProcess; output: () => string; ready: Promise<void> } {
  let out = '';
  const child = spawn(process.execPath, ['--import', 'tsx', join(process.cwd(), 'ingest', 'cli', 'main.ts'), 'serve', ...args], { stdio: ['ignore', 'ignore', 'pipe'] });
  child.stderr?.setEncoding('utf8');
  child.stderr?.on('data', (d: string) => (out += d));
  const ready = waitFor('the monitor reading the broker', () => {
    if (child.exitCode !== null) throw new Error(`the monitor exited with ${child.exitCode}:\n${out}`);
    return /broker: shard .* reading/.test(out);
  }, 60_000);
  return { child, output: () => out, ready };
}

it('loses and doubles nothing across a SIGKILL and a restart', async () => {
  const files = await writeDemoFiles(join(dir, 'demo'), { seed: 5, simsPerVignette: 40 });
  const plan = await loadPlan(files.plan);
  const live = (await readTracks(files.live, plan)).tracks;
  const owned = plan.vignettes.slice(0, 3).map((v) => v.id);
  const mine = live.filter((t) => owned.includes(t.vignette));
  const layout: Layout = { prefix: 'plumbline', event: 'restart' };
  await ensureStreams(nc, layout);
  const port = await freePort();
  const journalPath = join(dir, 'shard.sqlite');
  const args = ['--plan', files.plan, '--baseline', files.baseline, '--journal', journalPath, '--port', String(port), '--broker', broker.url, '--shard', owned.join(','), '--event', layout.event];

  const first = monitorProcess(args);
  await first.ready;
  // Every run of the event at 60× its pace, all at once; notes while it flies.
  const publishing = publishTracks(nc, live, { layout, plan, speed: 60, overlap: live.length });
  const js = jetstream(nc);
  const notes = mine.map((t, i) => ({ v: 1 as const, type: 'note' as const, id: `n${i}`, vignette: t.vignette, track: t.track, t: 30, text: `swell from the north-west (${i})` }));
  await new Promise((r) => setTimeout(r, 1500));
  for (const n of notes.slice(0, 3)) await publishMessage(js, layout, n);
  await new Promise((r) => setTimeout(r, 1000));
  first.child.kill('SIGKILL');
  await new Promise((r) => first.child.once('exit', r));
  for (const n of notes.slice(3)) await publishMessage(js, layout, n);

  const second = monitorProcess(args);
  await second.ready;
  expect(second.output()).toMatch(/consumer \S+ resumes (at|after) stream message \d+/);
  await publishing;
  await waitFor('every run of the shard judged', async () => {
    const r = await fetch(`http://127.0.0.1:${port}/api/export`).catch(() => undefined);
    return r?.ok === true && ((await r.json()) as { runs: unknown[] }).runs.length === mine.length;
  }, 120_000);
  await waitFor('every note journaled', async () => {
    const r = (await (await fetch(`http://127.0.0.1:${port}/api/state`)).json()) as { log: Array<{ kind: string }> };
    return r.log.filter((e) => e.kind === 'note').length >= notes.length;
  }, 30_000);
  // The monitor is one of the service's sources: /healthz lists it with its counters.
  const health = (await (await fetch(`http://127.0.0.1:${port}/healthz`)).json()) as { sources: Array<{ name: string; counters: { shard?: string; received?: number; acknowledged?: number } }> };
  const listed = health.sources.find((s) => s.name === 'broker');
  expect(listed?.counters.received).toBeGreaterThan(0);
  expect(listed?.counters.acknowledged).toBeGreaterThan(0);
  const exited = new Promise((r) => second.child.once('exit', r));
  second.child.kill('SIGTERM');
  await exited;

  const journal = Journal.open(journalPath);
  try {
    const got = journalPoints(journal);
    expect(got.doubled).toBe(0);
    expect(got.points).toEqual(publishedPoints(mine));
    expect([...got.closed].sort()).toEqual(mine.map((t) => `${t.vignette}/${t.track}`).sort());
    const logged = journal.log().filter((e) => e.kind === 'note').map((e) => (e.body as { text: string }).text).sort();
    expect(logged).toEqual(notes.map((n) => n.text).sort());
  } finally {
    journal.close();
  }
}, 300_000);
