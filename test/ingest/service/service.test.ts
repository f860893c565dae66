/**
 * The live service over a real socket on an ephemeral port: one engine, two paths (the streamed
 * event gives exactly what `plumbline assess` gives on the same files), restart from the journal,
 * a corpus of bad messages, and the security defaults.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assessEvent, type EventAssessment } from '../../../engine/event.js';
import type { RawTrack } from '../../../engine/types.js';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../../ingest/plan.js';
import { assessmentReportSchema, type AssessmentReport } from '../../../ingest/report.js';
import { replay } from '../../../ingest/service/replay.js';
import { ServeError, startServer, type RunningServer } from '../../../ingest/service/server.js';
import { readTracks } from '../../../ingest/tracks-reader.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-service-'));
let files: Awaited<ReturnType<typeof writeDemoFiles>>;
let plan: EventPlan;
let live: RawTrack[];
let expected: EventAssessment;

beforeAll(async () => {
  files = await writeDemoFiles(join(dir, 'demo'), { seed: 11, simsPerVignette: 40 });
  plan = await loadPlan(files.plan);
  live = (await readTracks(files.live, plan)).tracks;
  const sims = (await readTracks(files.baseline, plan)).tracks;
  expected = assessEvent(plan.vignettes, plan.channels, plan.analysis, sims, live);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const feedUrl = (s: RunningServer) => `${s.url.replace('http', 'ws')}/feed`;

function expectSameAsBatch(report: AssessmentReport): void {
  assessmentReportSchema.parse(report);
  expect(report.runs).toHaveLength(expected.runs.length);
  expected.runs.forEach((run, i) => {
    const got = report.runs[i];
    expect(`${got.vignette}/${got.track}`).toBe(`${run.vignette}/${run.track}`);
    const p = run.assessment?.result.pValues;
    expect(got.overall?.pValue).toBe(p?.overall);
    expect(got.statistics?.l2.pValue).toBe(p?.l2);
    expect(got.statistics?.score.pValue).toBe(p?.score);
    expect(got.statistics?.residual.pValue).toBe(p?.residual);
    expect(got.statistics?.l2.value).toBe(run.assessment?.result.live.l2);
  });
  expect(report.combined?.pValue).toBe(expected.combined?.pValue);
}

/** A raw producer connection that collects replies. */
async function producer(url: string, headers: Record<string, string> = {}): Promise<{ ws: WebSocket; replies: Array<Record<string, unknown>>; next: (pred: (r: Record<string, unknown>) => boolean) => Promise<Record<string, unknown>> }> {
  const ws = new WebSocket(url, { headers });
  const replies: Array<Record<string, unknown>> = [];
  const waiters: Array<{ pred: (r: Record<string, unknown>) => boolean; resolve: (r: Record<string, unknown>) => void }> = [];
  ws.on('message', (d) => {
    const r = JSON.parse(d.toString()) as Record<string, unknown>;
    replies.push(r);
    for (const w of [...waiters]) {
      if (w.pred(r)) {
        waiters.splice(waiters.indexOf(w), 1);
        w.resolve(r);
      }
    }
  });
  await new Promise<void>((res, rej) => {
    ws.once('open', () => res());
    ws.once('error', rej);
  });
  const next = (pred: (r: Record<string, unknown>) => boolean) =>
    new Promise<Record<string, unknown>>((resolve, reject) => {
      const found = replies.find(pred);
      if (found) return resolve(found);
      const timer = setTimeout(() => reject(new Error('no matching reply within 10 s')), 10_000);
      waiters.push({ pred, resolve: (r) => { clearTimeout(timer); resolve(r); } });
    });
  return { ws, replies, next };
}

describe('one engine, two paths', () => {
  it('a streamed event gives exactly the per-run and combined p-values of the batch assessment', async () => {
    const server = await startServer({ planPath: files.plan, baselinePath: files.baseline, journalPath: join(dir, 'a.sqlite'), port: 0 });
    try {
      await server.service.settle();
      const summary = await replay({ url: feedUrl(server), plan, live, speed: 0, overlap: 3 });
      expect(summary.errors).toBe(0);
      await server.service.settle();
      expectSameAsBatch(server.service.exportReport());
      // and the HTTP export is the same document
      const viaHttp = (await (await fetch(`${server.url}/api/export`)).json()) as AssessmentReport;
      expectSameAsBatch(viaHttp);
      const state = (await (await fetch(`${server.url}/api/state`)).json()) as { runs: Array<{ status: string; judgement?: { kind: string } }> };
      expect(state.runs.every((r) => r.status === 'complete' && r.judgement?.kind === 'final')).toBe(true);
      const detail = await fetch(`${server.url}/api/runs/S1-L2/live-1`);
      expect(detail.status).toBe(200);
      expect(((await detail.json()) as { run: { flags: string[] } }).run).toBeDefined();
    } finally {
      await server.close();
    }
  });
});

describe('simulated runs streamed over the feed', () => {
  it('a baseline that arrives as sim tracks is fitted (off the event loop) and judges the live runs like the batch path', async () => {
    const sims = (await readTracks(files.baseline, plan)).tracks;
    const server = await startServer({ planPath: files.plan, journalPath: join(dir, 'sims.sqlite'), port: 0, refitDelayMs: 200 });
    try {
      expect(server.service.snapshot().vignettes.every((v) => v.baseline.status === 'waiting' && v.baseline.sims === 0)).toBe(true);
      const summary = await replay({ url: feedUrl(server), plan, live: [], sims, speed: 0 });
      expect(summary.errors).toBe(0);
      await server.service.settle();
      const state = server.service.snapshot();
      expect(state.vignettes.every((v) => v.baseline.status === 'ready' && v.baseline.sims === 40)).toBe(true);
      await replay({ url: feedUrl(server), plan, live, speed: 0, overlap: 3 });
      await server.service.settle();
      expectSameAsBatch(server.service.exportReport());
    } finally {
      await server.close();
    }
  });
});

describe('restart from the journal', () => {
  it('stopped mid-stream and started again on the same journal, the finished event gives the same results', async () => {
    const journalPath = join(dir, 'b.sqlite');
    const first = await startServer({ planPath: files.plan, baselinePath: files.baseline, journalPath, port: 0 });
    let before: AssessmentReport;
    try {
      await first.service.settle();
      await replay({ url: feedUrl(first), plan, live: live.slice(0, 4), speed: 0, overlap: 2 });
      // Half of the fifth run, left open, as a producer cut off mid-run.
      const half = live[4];
      const p = await producer(feedUrl(first));
      p.ws.send(JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: half.vignette, track: half.track, source: 'live', channels: ['range', 'bearing'] }));
      const n = Math.floor(half.t.length / 2);
      const points = Array.from({ length: n }, (_, i) => ({ seq: i + 1, t: half.t[i], values: [half.values[0][i], half.values[1][i]] }));
      p.ws.send(JSON.stringify({ v: 1, type: 'points', id: 'p', vignette: half.vignette, track: half.track, points }));
      const ack = await p.next((r) => r.type === 'ack' && r.id === 'p');
      expect(ack.committedSeq).toBe(n);
      p.ws.close();
      await first.service.settle();
      before = first.service.exportReport();
      expect(before.runs).toHaveLength(4);
    } finally {
      await first.close();
    }
    // Restart: no plan and no baseline given: both come from the journal.
    const second = await startServer({ journalPath, port: 0 });
    try {
      await second.service.settle();
      const restored = second.service.exportReport();
      expect(restored.runs).toEqual(before.runs);
      expect(restored.combined).toEqual(before.combined);
      expect(restored.sequential).toEqual(before.sequential);
      expect(restored.vignettes).toEqual(before.vignettes);
      const open = second.service.snapshot().runs.find((r) => r.key === `${live[4].vignette}/${live[4].track}`);
      expect(open?.status).toBe('in-flight');
      expect(open?.points).toBe(Math.floor(live[4].t.length / 2));
      // The producer resends everything; the server resumes each run from its committed point.
      const summary = await replay({ url: feedUrl(second), plan, live, speed: 0, overlap: 3 });
      expect(summary.errors).toBe(0);
      await second.service.settle();
      expectSameAsBatch(second.service.exportReport());
    } finally {
      await second.close();
    }
  });
});

describe('bad messages', () => {
  it('each gets its stable code and the offending id, the connection stays up, accepted data is unaffected', async () => {
    const server = await startServer({ planPath: files.plan, baselinePath: files.baseline, journalPath: join(dir, 'c.sqlite'), port: 0, inProcessCompute: true });
    try {
      const p = await producer(feedUrl(server));
      const send = (m: unknown) => p.ws.send(typeof m === 'string' ? m : JSON.stringify(m));
      const errorFor = async (id: string) => p.next((r) => r.type === 'error' && r.id === id);
      const V = 'S1-L1';
      const T = 'bad-corpus';
      send({ v: 1, type: 'open', id: 'open', vignette: V, track: T, source: 'live', channels: ['bearing', 'range'] });
      expect((await p.next((r) => r.id === 'open')).type).toBe('opened');
      const pt = (seq: number, t: number, range: number, bearing: number) => ({ seq, t, values: [bearing, range] });
      send({ v: 1, type: 'points', id: 'ok1', vignette: V, track: T, points: [pt(1, 0, 2500, 120), pt(2, 10, 2450, 120.5)] });
      expect((await p.next((r) => r.id === 'ok1' && r.type === 'ack')).committedSeq).toBe(2);

      send('this is not json');
      expect((await p.next((r) => r.type === 'error' && r.code === 'BAD_JSON')).code).toBe('BAD_JSON');
      send({ v: 2, type: 'open', id: 'v2' });
      expect((await errorFor('v2')).code).toBe('UNSUPPORTED_VERSION');
      send({ v: 1, type: 'points', id: 'shape' });
      expect((await errorFor('shape')).code).toBe('BAD_MESSAGE');
      send({ v: 1, type: 'points', id: 'inf', vignette: V, track: T, points: [{ seq: 3, t: 11, values: [1e400, 1] }] });
      expect((await errorFor('inf')).code).toBe('BAD_MESSAGE');
      send({ v: 1, type: 'open', id: 'unknown', vignette: 'S9-L9', track: 'x', source: 'live', channels: ['range', 'bearing'] });
      expect((await errorFor('unknown')).code).toBe('UNKNOWN_VIGNETTE');
      send({ v: 1, type: 'open', id: 'chan', vignette: V, track: 'y', source: 'live', channels: ['range', 'speed'] });
      expect((await errorFor('chan')).code).toBe('CHANNELS_MISMATCH');
      send({ v: 1, type: 'open', id: 'conflict', vignette: V, track: T, source: 'sim', channels: ['bearing', 'range'] });
      expect((await errorFor('conflict')).code).toBe('TRACK_CONFLICT');
      send({ v: 1, type: 'points', id: 'notopen', vignette: V, track: 'never', points: [pt(1, 0, 1, 1)] });
      expect((await errorFor('notopen')).code).toBe('TRACK_NOT_OPEN');
      send({ v: 1, type: 'points', id: 'count', vignette: V, track: T, points: [{ seq: 3, t: 11, values: [1] }] });
      const count = await errorFor('count');
      expect(count.code).toBe('WRONG_VALUE_COUNT');
      expect(count.rejected).toEqual([expect.objectContaining({ seq: 3, code: 'WRONG_VALUE_COUNT' })]);
      send({ v: 1, type: 'points', id: 'back', vignette: V, track: T, points: [pt(3, 2, 2400, 121)] });
      expect((await errorFor('back')).code).toBe('TIME_REVERSED');
      send({ v: 1, type: 'points', id: 'conflict2', vignette: V, track: T, points: [pt(2, 10, 9999, 120.5)] });
      expect((await errorFor('conflict2')).code).toBe('DUPLICATE_CONFLICT');
      send({ v: 1, type: 'points', id: 'horizon', vignette: V, track: T, points: [pt(3, 999, 2400, 121)] });
      expect((await errorFor('horizon')).code).toBe('BEYOND_HORIZON');
      send({ v: 1, type: 'close', id: 'early', vignette: V, track: T, lastSeq: 50 });
      expect((await errorFor('early')).code).toBe('INCOMPLETE');
      p.ws.send(Buffer.from([1, 2, 3]), { binary: true });
      expect((await p.next((r) => r.type === 'error' && String(r.reason).includes('binary'))).code).toBe('BAD_MESSAGE');

      // A mixed message: good points are accepted, the bad one is refused with its seq.
      send({ v: 1, type: 'points', id: 'mixed', vignette: V, track: T, points: [pt(3, 12, 2440, 120.6), pt(4, 13, 2430, 120.7), { seq: 5, t: 14, values: [1, 2, 3] }] });
      expect((await errorFor('mixed')).rejected).toEqual([expect.objectContaining({ seq: 5 })]);
      expect((await p.next((r) => r.id === 'mixed' && r.type === 'ack')).committedSeq).toBe(4);
      // Idempotent duplicate: same seq, same data.
      send({ v: 1, type: 'points', id: 'dup', vignette: V, track: T, points: [pt(4, 13, 2430, 120.7)] });
      const dup = await p.next((r) => r.id === 'dup' && r.type === 'ack');
      expect(dup.duplicates).toBe(1);
      expect(dup.committedSeq).toBe(4);
      // Out of order within the tolerance is accepted and put in order.
      send({ v: 1, type: 'points', id: 'ooo', vignette: V, track: T, points: [pt(6, 16, 2410, 120.9), pt(5, 15, 2420, 120.8)] });
      expect((await p.next((r) => r.id === 'ooo' && r.type === 'ack')).committedSeq).toBe(6);
      send({ v: 1, type: 'close', id: 'close', vignette: V, track: T, lastSeq: 6 });
      expect((await p.next((r) => r.id === 'close')).type).toBe('closed');
      const detail = server.service.detail(V, T);
      expect(detail?.raw.t).toEqual([0, 10, 12, 13, 15, 16]);
      expect(detail?.raw.values[0]).toEqual([2500, 2450, 2440, 2430, 2420, 2410]);
      expect(p.ws.readyState).toBe(WebSocket.OPEN);

      // A dashboard connection may send notes, nothing else.
      const w = await producer(`${server.url.replace('http', 'ws')}/watch`);
      await w.next((r) => r.type === 'snapshot');
      w.ws.send(JSON.stringify({ v: 1, type: 'open', id: 'w-open', vignette: V, track: 'z', source: 'live', channels: ['range', 'bearing'] }));
      expect((await w.next((r) => r.id === 'w-open')).code).toBe('NOT_PERMITTED');
      w.ws.send(JSON.stringify({ v: 1, type: 'note', id: 'w-note', vignette: V, track: T, t: 12, text: '<b>gusty</b> on the final leg' }));
      expect((await w.next((r) => r.id === 'w-note')).type).toBe('noted');
      expect(server.service.snapshot().log.some((e) => e.text === '<b>gusty</b> on the final leg')).toBe(true);

      // An oversized frame closes only the abusive connection (1009).
      const big = await producer(feedUrl(server));
      const closed = new Promise<number>((r) => big.ws.once('close', (code) => r(code)));
      big.ws.send('x'.repeat(70 * 1024));
      expect(await closed).toBe(1009);
      send({ v: 1, type: 'note', id: 'still-up', text: 'after the oversized frame' });
      expect((await p.next((r) => r.id === 'still-up')).type).toBe('noted');
      p.ws.close();
      w.ws.close();
    } finally {
      await server.close();
    }
  });

  it('a flooding producer is answered RATE_LIMITED and then closed (1008), others keep working', async () => {
    const server = await startServer({
      planPath: files.plan,
      journalPath: join(dir, 'd.sqlite'),
      port: 0,
      inProcessCompute: true,
      limits: { messagesPerSecond: 50, messageBurst: 20, floodStrikes: 30 },
    });
    try {
      const flood = await producer(feedUrl(server));
      const closed = new Promise<number>((r) => flood.ws.once('close', (code) => r(code)));
      for (let i = 0; i < 200; i++) flood.ws.send(JSON.stringify({ v: 1, type: 'note', id: `n${i}`, text: 'spam' }));
      expect(await closed).toBe(1008);
      expect(flood.replies.some((r) => r.code === 'RATE_LIMITED')).toBe(true);
      const calm = await producer(feedUrl(server));
      calm.ws.send(JSON.stringify({ v: 1, type: 'note', id: 'calm', text: 'hello' }));
      expect((await calm.next((r) => r.id === 'calm')).type).toBe('noted');
      calm.ws.close();
    } finally {
      await server.close();
    }
  });
});

describe('security defaults', () => {
  it('refuses a non-loopback bind without a producer token', async () => {
    await expect(startServer({ planPath: files.plan, journalPath: join(dir, 'e.sqlite'), host: '0.0.0.0', port: 0 })).rejects.toMatchObject({ code: 'TOKEN_REQUIRED' });
    await expect(startServer({ planPath: files.plan, journalPath: join(dir, 'e.sqlite'), host: '0.0.0.0', port: 0 })).rejects.toBeInstanceOf(ServeError);
  });

  it('with a token, producers must present it; dashboards from other origins are refused', async () => {
    const server = await startServer({ planPath: files.plan, journalPath: join(dir, 'f.sqlite'), port: 0, token: 'range-token-1', inProcessCompute: true });
    try {
      const status = (url: string, headers: Record<string, string>) =>
        new Promise<number>((res) => {
          const ws = new WebSocket(url, { headers });
          ws.once('open', () => {
            ws.close();
            res(101);
          });
          ws.once('unexpected-response', (_q, r) => res(r.statusCode ?? 0));
          ws.once('error', () => undefined);
        });
      expect(await status(feedUrl(server), {})).toBe(401);
      expect(await status(feedUrl(server), { authorization: 'Bearer wrong-token-1' })).toBe(401);
      expect(await status(feedUrl(server), { authorization: 'Bearer range-token-1' })).toBe(101);
      expect(await status(`${feedUrl(server)}?token=range-token-1`, {})).toBe(101);
      const watch = `${server.url.replace('http', 'ws')}/watch`;
      expect(await status(watch, {})).toBe(101);
      expect(await status(watch, { origin: 'http://elsewhere.invalid' })).toBe(403);
      expect(await status(watch, { origin: server.url })).toBe(101);
      expect(await status(`${server.url.replace('http', 'ws')}/nowhere`, {})).toBe(404);
      expect((await fetch(`${server.url}/api/state`, { method: 'POST' })).status).toBe(405);
    } finally {
      await server.close();
    }
  });

  it('a taken port is a clear error', async () => {
    const a = await startServer({ planPath: files.plan, journalPath: join(dir, 'g.sqlite'), port: 0, inProcessCompute: true });
    try {
      await expect(startServer({ planPath: files.plan, journalPath: join(dir, 'h.sqlite'), port: a.port, inProcessCompute: true })).rejects.toMatchObject({ code: 'PORT_IN_USE' });
    } finally {
      await a.close();
    }
  });
});

describe('heartbeats', () => {
  it('a peer that stops answering pings is terminated; one that answers stays', async () => {
    const server = await startServer({ planPath: files.plan, journalPath: join(dir, 'hb.sqlite'), port: 0, inProcessCompute: true, limits: { heartbeatMs: 100 } });
    try {
      const watch = `${server.url.replace('http', 'ws')}/watch`;
      // ws answers pings by itself unless told not to: this one plays a dead peer.
      const dead = new WebSocket(watch, { autoPong: false });
      const alive = new WebSocket(watch);
      await Promise.all([dead, alive].map((ws) => new Promise((r) => ws.once('open', r))));
      const closed = await new Promise<number>((r) => dead.once('close', (code) => r(code)));
      expect(closed).toBe(1006); // terminated without a closing handshake
      expect(alive.readyState).toBe(WebSocket.OPEN);
      alive.close();
    } finally {
      await server.close();
    }
  });
});

describe('dashboard feed', () => {
  it('sends a snapshot, then per-run deltas gathered per window (at most one per run per window) whatever the input rate', async () => {
    const server = await startServer({ planPath: files.plan, baselinePath: files.baseline, journalPath: join(dir, 'i.sqlite'), port: 0, limits: { dashboardWindowMs: 250 } });
    try {
      await server.service.settle();
      const w = await producer(`${server.url.replace('http', 'ws')}/watch`);
      const snap = await w.next((r) => r.type === 'snapshot');
      expect((snap.state as { vignettes: unknown[] }).vignettes).toHaveLength(9);
      const p = await producer(feedUrl(server));
      const run = live[0];
      p.ws.send(JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: run.vignette, track: run.track, source: 'live', channels: ['range', 'bearing'] }));
      await p.next((r) => r.id === 'o');
      const start = Date.now();
      for (let i = 0; i < run.t.length; i++) {
        p.ws.send(JSON.stringify({ v: 1, type: 'points', id: `p${i}`, vignette: run.vignette, track: run.track, points: [{ seq: i + 1, t: run.t[i], values: [run.values[0][i], run.values[1][i]] }] }));
      }
      await p.next((r) => r.id === `p${run.t.length - 1}` && r.type === 'ack');
      await new Promise((r) => setTimeout(r, 600));
      const seconds = (Date.now() - start) / 1000;
      const key = `${run.vignette}/${run.track}`;
      // Each window's changes come as one `updates` message.
      const frames = w.replies.filter((r) => r.type === 'updates');
      expect(frames.length).toBeLessThanOrEqual(Math.ceil(seconds * 4) + 2);
      const deltas = frames.flatMap((r) => r.updates as Array<Record<string, unknown>>).filter((r) => (r.type === 'run' && (r.run as { key: string }).key === key) || (r.type === 'progress' && r.key === key));
      // One point per message: hundreds of changes, at most one delta per 250 ms window (+1 leading).
      expect(deltas.length).toBeGreaterThan(0);
      expect(deltas.length).toBeLessThanOrEqual(Math.ceil(seconds * 4) + 2);
      // Points-only changes come as `progress`, others as the whole run; the last delta shows every point.
      const last = deltas[deltas.length - 1];
      expect(last.type === 'progress' ? last.points : (last.run as { points: number }).points).toBe(run.t.length);
      p.ws.close();
      w.ws.close();
    } finally {
      await server.close();
    }
  });
});
