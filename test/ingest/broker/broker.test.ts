/**
 * Broker ingest against a real nats-server with JetStream (test/support/broker.ts starts it):
 * the invented demo event published to the stream, read by two shard monitors and by one monitor
 * of the whole event; the gatherer's event-level combination across the two shards equals the one
 * monitor's; bad messages on the stream are terminated with the service's codes and never
 * redelivered; a consumer replayed from the stream's start doubles nothing.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { jetstream, jetstreamManager } from '@nats-io/jetstream';
import type { NatsConnection } from '@nats-io/transport-node';
import jStat from 'jstat';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RawTrack } from '../../../engine/types.js';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../../ingest/plan.js';
import { readTracks } from '../../../ingest/tracks-reader.js';
import { startGatherer } from '../../../ingest/broker/gather.js';
import { publishMessage, publishTracks } from '../../../ingest/broker/publisher.js';
import { connectBroker, ensureStreams } from '../../../ingest/broker/streams.js';
import { consumerName, inputStream, inputSubject, type Layout } from '../../../ingest/broker/subjects.js';
import type { EventView } from '../../../ingest/service/view.js';
import { startBroker, type TestBroker } from '../../support/broker.js';
import { inProcessMonitor, journalPoints, publishedPoints, waitFor, type InProcessMonitor } from './support.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-broker-'));
let broker: TestBroker;
let nc: NatsConnection;
let files: Awaited<ReturnType<typeof writeDemoFiles>>;
let plan: EventPlan;
let live: RawTrack[];

beforeAll(async () => {
  broker = await startBroker();
  nc = await connectBroker(broker.url, 'broker test');
  files = await writeDemoFiles(join(dir, 'demo'), { seed: 11, simsPerVignette: 40 });
  plan = await loadPlan(files.plan);
  live = (await readTracks(files.live, plan)).tracks;
}, 60_000);
afterAll(async () => {
  await nc?.drain();
  await broker?.stop();
  rmSync(dir, { recursive: true, force: true });
});

const finalRuns = (m: InProcessMonitor) => m.server.service.exportReport().runs.length;

describe('the demo event through the broker into two shard monitors', () => {
  const layout: Layout = { prefix: 'plumbline', event: 'harbour trials' };
  let a: InProcessMonitor;
  let b: InProcessMonitor;
  let whole: InProcessMonitor;

  beforeAll(async () => {
    const ids = plan.vignettes.map((v) => v.id);
    const common = { broker: broker.url, layout, dir, plan: files.plan, baseline: files.baseline };
    a = await inProcessMonitor({ ...common, name: 'shard-a', vignettes: ids.slice(0, 4) });
    b = await inProcessMonitor({ ...common, name: 'shard-b', vignettes: ids.slice(4) });
    whole = await inProcessMonitor({ ...common, name: 'whole', vignettes: ids });
    const summary = await publishTracks(nc, live, { layout, plan, overlap: 6 });
    expect(summary.points).toBe(live.reduce((s, t) => s + t.t.length, 0));
    await waitFor('every run judged', () => finalRuns(a) + finalRuns(b) === live.length && finalRuns(whole) === live.length);
  }, 300_000);
  afterAll(async () => {
    await a?.close();
    await b?.close();
    await whole?.close();
  });

  it('journals exactly the published points, each once, in the shard that owns the vignette', () => {
    for (const [m, owned] of [
      [a, plan.vignettes.slice(0, 4).map((v) => v.id)],
      [b, plan.vignettes.slice(4).map((v) => v.id)],
      [whole, plan.vignettes.map((v) => v.id)],
    ] as const) {
      const got = journalPoints(m.server.journal);
      const want = publishedPoints(live.filter((t) => owned.includes(t.vignette)));
      expect(got.doubled).toBe(0);
      expect([...got.points.keys()].sort()).toEqual([...want.keys()].sort());
      for (const [key, points] of want) expect(got.points.get(key)).toEqual(points);
      expect([...got.closed].sort()).toEqual([...want.keys()].sort());
      expect(m.monitor.stats().terminated).toEqual({});
    }
  });

  it("combines the shards' runs into the same event values as one monitor of the whole event", async () => {
    const g = await startGatherer({ nc, layout, port: 0 });
    try {
      await waitFor('all results at the gatherer', () => g.results().length === live.length, 30_000);
      const one = whole.server.service.exportReport();
      const res = await fetch(`${g.url}/api/combined`);
      const got = (await res.json()) as { combined: { pValue: number; statistic: number; byStatistic: Record<string, number>; count: number }; vignettes: Array<{ id: string; combined?: { pValue: number }; adjustedPValue?: number; verdict: string }> };
      expect(got.combined.count).toBe(live.length);
      // Exactly equal: the same engine function on the same inputs, in the same order, with the same seed.
      expect(got.combined.pValue).toBe(one.combined?.pValue);
      expect(got.combined.statistic).toBe(one.combined?.statistic);
      expect(got.combined.byStatistic).toEqual({ l2: one.combined?.byStatistic.l2.pValue, score: one.combined?.byStatistic.score.pValue, residual: one.combined?.byStatistic.residual.pValue });
      for (const v of one.vignettes) {
        const gv = got.vignettes.find((x) => x.id === v.id);
        expect(gv?.combined?.pValue).toBe(v.combined?.pValue);
        expect(gv?.adjustedPValue).toBe(v.adjustedPValue);
        expect(gv?.verdict).toBe(v.verdict);
      }
      // Outside reference: Fisher's method (Fisher 1932, §21.1) — −2 Σ ln p is χ² with 2k degrees of
      // freedom under the null; jStat's chi-square CDF gives the combined l2 p-value.
      const x = -2 * one.runs.reduce((s, r) => s + Math.log(r.statistics?.l2.pValue ?? Number.NaN), 0);
      const fisher = 1 - (jStat as unknown as { chisquare: { cdf(x: number, k: number): number } }).chisquare.cdf(x, 2 * live.length);
      expect(Math.abs(got.combined.byStatistic.l2 - fisher)).toBeLessThan(1e-9 + 1e-9 * fisher);

      // The gathered dashboard view: every vignette and run of both shards, the event value as above.
      const state = (await (await fetch(`${g.url}/api/state`)).json()) as EventView;
      expect(state.vignettes.map((v) => v.id)).toEqual(plan.vignettes.map((v) => v.id));
      expect(state.runs).toHaveLength(live.length);
      expect(state.combined?.pValue).toBe(one.combined?.pValue);
      expect(state.timeline.at(-1)?.pValue).toBe(one.combined?.pValue);
      // It names the monitors it reads, here the two shards and the whole-event monitor (the
      // dashboard links each one's debrief package from them).
      expect(state.gathered?.map((m) => m.shard).sort()).toEqual(['shard-a', 'shard-b', 'whole']);
      expect(state.gathered?.find((m) => m.shard === 'shard-a')?.url).toBe(a.server.url);
      expect(state.gathered?.find((m) => m.shard === 'shard-b')?.url).toBe(b.server.url);
      const run = live[live.length - 1];
      const detail = await fetch(`${g.url}/api/runs/${encodeURIComponent(run.vignette)}/${encodeURIComponent(run.track)}`);
      expect(detail.status).toBe(200);
    } finally {
      await g.close();
    }
  }, 60_000);

  it('terminates bad messages with the service code, delivers none again beyond a bound, and keeps the good part', async () => {
    const js = jetstream(nc);
    const v = plan.vignettes[0].id;
    const channels = plan.channels.map((c) => c.name);
    const before = a.monitor.stats();
    await js.publish(inputSubject(layout, v, 'bad-1'), '{"v":1,"type":"open",');
    await js.publish(inputSubject(layout, v, 'bad-2'), JSON.stringify({ v: 1, type: 'points', id: 'p', vignette: v, track: 'bad-2', points: [{ seq: 1, t: 0, values: [1, 2] }] }));
    await js.publish(inputSubject(layout, v, 'bad-3'), JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: v, track: 'another-run', source: 'live', channels }));
    await js.publish(inputSubject(layout, v, 'bad-4'), JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: v, track: 'bad-4', source: 'live', channels: ['depth'] }));
    await publishMessage(js, layout, { v: 1, type: 'open', id: 'o5', vignette: v, track: 'bad-5', source: 'live', channels });
    await publishMessage(js, layout, { v: 1, type: 'points', id: 'p5', vignette: v, track: 'bad-5', points: [{ seq: 1, t: 0, values: [2500, 120] }, { seq: 2, t: 0.5, values: [2499] }] });
    await js.publish(inputSubject(layout, v, 'bad-6'), JSON.stringify({ v: 2, type: 'open', id: 'o', vignette: v, track: 'bad-6', source: 'live', channels }));
    const codes = ['BAD_JSON', 'TRACK_NOT_OPEN', 'SUBJECT_MISMATCH', 'CHANNELS_MISMATCH', 'WRONG_VALUE_COUNT', 'UNSUPPORTED_VERSION'];
    await waitFor('the bad messages terminated', () => codes.every((c) => (a.monitor.stats().terminated[c] ?? 0) >= 1), 30_000);
    // Points before any `open` may be a matter of order: delivered again up to 4 times, then terminated.
    expect(a.lines.filter((l) => l.includes(`${inputSubject(layout, v, 'bad-2')} #`) && l.includes('will be delivered again (TRACK_NOT_OPEN'))).toHaveLength(3);
    for (const c of codes) expect(a.lines.some((l) => l.includes('terminated') && l.includes(`(${c})`))).toBe(true);
    const after = a.monitor.stats();
    expect(after.received - before.received).toBe(7 + 3);
    // The good point of the partly refused message is journaled; the bad one is not.
    expect(journalPoints(a.server.journal).points.get(`${v}/bad-5`)).toEqual(new Map([[1, '0|2500|120']]));
    // Terminated means done: nothing is pending or redelivered on the consumer.
    const jsm = await jetstreamManager(nc);
    const info = async () => jsm.consumers.info(inputStream(layout), consumerName('shard-a', v));
    await waitFor('the terminations at the broker', async () => (await info()).num_ack_pending === 0, 10_000);
    await new Promise((r) => setTimeout(r, 500));
    const c = await info();
    expect(c.num_ack_pending).toBe(0);
    expect(c.num_redelivered).toBeLessThanOrEqual(3);
    expect(c.ack_floor.stream_seq).toBe(c.delivered.stream_seq);
  }, 30_000);
});

describe('replaying a consumer from the stream start', () => {
  const layout: Layout = { prefix: 'plumbline', event: 'replayed' };

  it('doubles no point and no note when every message is delivered again', async () => {
    const v = plan.vignettes[1].id;
    const mine = live.filter((t) => t.vignette === v);
    const common = { broker: broker.url, layout, dir, plan: files.plan, baseline: files.baseline, name: 'replay', vignettes: [v] };
    let m = await inProcessMonitor(common);
    await publishTracks(nc, mine, { layout, plan });
    const js = jetstream(nc);
    const note = { v: 1 as const, type: 'note' as const, id: 'n1', vignette: v, track: mine[0].track, t: 120, text: 'spray over the radar mast', author: 'range officer' };
    await publishMessage(js, layout, note);
    await waitFor('runs judged and the note written', () => finalRuns(m) === mine.length && m.server.journal.log().some((e) => e.kind === 'note'));
    const first = journalPoints(m.server.journal);
    const combined = m.server.service.exportReport().combined?.pValue;
    await m.close();

    // The consumer's state is lost (a new consumer starts at the stream's first message): every
    // message reaches the same journal again.
    const jsm = await ensureStreams(nc, layout);
    await jsm.consumers.delete(inputStream(layout), consumerName('replay', v));
    m = await inProcessMonitor(common);
    try {
      const total = mine.reduce((s, t) => s + t.t.length, 0);
      const messages = mine.length * 2 + mine.reduce((s, t) => s + Math.ceil(t.t.length / 50), 0) + 1;
      await waitFor(`the replay acknowledged (${messages} messages)`, () => m.monitor.stats().acknowledged >= messages, 30_000).catch((e: unknown) => {
        throw new Error(`${String(e)}: ${JSON.stringify(m.monitor.stats())}\n${m.lines.join('\n')}`);
      });
      const again = journalPoints(m.server.journal);
      expect(again.doubled).toBe(0);
      expect(again.points).toEqual(first.points);
      expect(again.points).toEqual(publishedPoints(mine));
      expect(m.monitor.stats().duplicatePoints).toBe(total);
      expect(m.monitor.stats().acceptedPoints).toBe(0);
      expect(m.monitor.stats().duplicateNotes).toBe(1);
      expect(m.server.journal.log().filter((e) => e.kind === 'note')).toHaveLength(1);
      expect(m.server.journal.tracks().filter((t) => t.source === 'live')).toHaveLength(mine.length);
      expect(m.server.service.exportReport().combined?.pValue).toBe(combined);
    } finally {
      await m.close();
    }
  }, 180_000);
});
