/**
 * The fit cache (ingest/service/fit-cache.ts). The reference for "the same results" is the
 * uncached computation: the service's own refit, and the batch path of `plumbline assess`
 * (engine/event.ts assessEvent), which never sees the cache. Doubles are compared with Object.is
 * (bit for bit, except NaN payloads), typed arrays element by element.
 */
import { copyFileSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assessEvent } from '../../../engine/event.js';
import type { RawTrack } from '../../../engine/types.js';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../../ingest/plan.js';
import { Compute, type AssessResult, type ComputeConfig } from '../../../ingest/service/compute.js';
import { checksum, FitCacheStore, packTrack, unpackTrack } from '../../../ingest/service/fit-cache.js';
import { Journal } from '../../../ingest/service/journal.js';
import { replay } from '../../../ingest/service/replay.js';
import { startServer, type RunningServer } from '../../../ingest/service/server.js';
import { readTracks } from '../../../ingest/tracks-reader.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-fitcache-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const VIGNETTE = 'S1-L1';
let plan: EventPlan;
let files: Awaited<ReturnType<typeof writeDemoFiles>>;
let sims: RawTrack[];
let live: RawTrack[];
let config: ComputeConfig;

beforeAll(async () => {
  files = await writeDemoFiles(join(dir, 'demo'), { seed: 5, simsPerVignette: 30, liveRunsPerVignette: 2 });
  plan = await loadPlan(files.plan);
  sims = (await readTracks(files.baseline, plan)).tracks.filter((t) => t.vignette === VIGNETTE);
  live = (await readTracks(files.live, plan)).tracks.filter((t) => t.vignette === VIGNETTE);
  config = { vignettes: plan.vignettes.filter((v) => v.id === VIGNETTE), channels: plan.channels, analysis: plan.analysis, provisionalStep: 30 };
});

/** Every number of two results equal bit for bit (Object.is), typed arrays too; `ms` ignored. */
function sameBits(a: unknown, b: unknown, path = '$'): void {
  if (typeof a === 'number' || typeof b === 'number') {
    if (!Object.is(a, b)) throw new Error(`${path}: ${String(a)} !== ${String(b)}`);
    return;
  }
  if (ArrayBuffer.isView(a) && ArrayBuffer.isView(b)) {
    const x = a as unknown as ArrayLike<number>;
    const y = b as unknown as ArrayLike<number>;
    expect(y.length, path).toBe(x.length);
    for (let i = 0; i < x.length; i++) if (!Object.is(x[i], y[i])) throw new Error(`${path}[${i}]: ${x[i]} !== ${y[i]}`);
    return;
  }
  if (a instanceof Map && b instanceof Map) return sameBits([...a], [...b], path);
  if (typeof a === 'object' && a !== null && typeof b === 'object' && b !== null) {
    const ka = Object.keys(a).filter((k) => k !== 'ms').sort();
    const kb = Object.keys(b).filter((k) => k !== 'ms').sort();
    expect(kb, path).toEqual(ka);
    for (const k of ka) sameBits((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], `${path}.${k}`);
    return;
  }
  expect(b, path).toEqual(a);
}

/** Final and provisional (first half of the run) judgements of every live run. */
function judgeAll(c: Compute): AssessResult[] {
  return live.flatMap((run) => {
    const half = run.t.length >> 1;
    const cut: RawTrack = { ...run, t: run.t.subarray(0, half), values: run.values.map((v) => v.subarray(0, half)) };
    return [c.assess(VIGNETTE, run, 'final'), c.assess(VIGNETTE, cut, 'provisional')];
  });
}

describe('fit cache in the computation', () => {
  it('a fit loaded from the cache judges runs bit for bit as the refit, and as plumbline assess', () => {
    const fresh = new Compute(config);
    fresh.addSims(VIGNETTE, sims);
    const fitted = fresh.fit(VIGNETTE);
    expect(fitted.error).toBeUndefined();
    const entry = fitted.cache && !fitted.cache.hit ? fitted.cache.entry : undefined;
    expect(entry).toBeDefined();

    const loaded = new Compute(config);
    // The tracks in another order: the fit sorts them by id, the cache refers to them by id.
    loaded.addSims(VIGNETTE, [...sims].reverse());
    const hit = loaded.fit(VIGNETTE, entry);
    expect(hit.cache).toEqual({ hit: true });
    sameBits({ ...fitted, cache: undefined }, { ...hit, cache: undefined });

    const a = judgeAll(fresh);
    const b = judgeAll(loaded);
    expect(a.filter((r) => !r.error).length).toBe(2 * live.length);
    sameBits(a, b);

    // The batch path (plumbline assess), which never sees the cache.
    const batch = assessEvent(config.vignettes, plan.channels, plan.analysis, sims, live);
    for (const run of batch.runs) {
      const r = b.find((x) => x.track === run.track && x.mode === 'final') as AssessResult;
      const x = run.assessment?.result;
      const y = r.assessment?.result;
      expect(x && y).toBeDefined();
      for (const field of ['pValues', 'live', 'reference', 'nullPValues'] as const) sameBits(x?.[field], y?.[field], `${run.track}.${field}`);
    }
  });

  it('a stale entry (one more simulated run) is refitted, and the refit is the plain fit', () => {
    const first = new Compute(config);
    first.addSims(VIGNETTE, sims.slice(0, -1));
    const old = first.fit(VIGNETTE);
    const entry = old.cache && !old.cache.hit ? old.cache.entry : undefined;

    const c = new Compute(config);
    c.addSims(VIGNETTE, sims);
    const r = c.fit(VIGNETTE, entry);
    expect(r.cache?.hit).toBe(false);
    expect(r.cache && !r.cache.hit ? r.cache.rejected : '').toMatch(/stale/);
    expect(r.sims).toBe(sims.length);
    const plain = new Compute(config);
    plain.addSims(VIGNETTE, sims);
    sameBits({ ...plain.fit(VIGNETTE), cache: undefined }, { ...r, cache: undefined });
    sameBits(judgeAll(plain), judgeAll(c));
  });

  it('a body that passes its checksum but is not a cached fit is refitted', () => {
    const c = new Compute(config);
    c.addSims(VIGNETTE, sims);
    const good = c.fit(VIGNETTE);
    const key = good.cache && !good.cache.hit ? (good.cache.entry?.key as string) : '';
    const r = c.fit(VIGNETTE, { key, body: new Uint8Array([1, 2, 3, 4]) });
    expect(r.cache && !r.cache.hit ? r.cache.rejected : '').toMatch(/unreadable/);
    expect(r.summary).toBeDefined();
  });
});

describe('fit cache in the journal', () => {
  it('a damaged body is found by its checksum and reported', () => {
    const j = Journal.open(join(dir, 'store.sqlite'));
    const notes: string[] = [];
    const store = new FitCacheStore(j, (l) => notes.push(l));
    const body = new Uint8Array(64).map((_, i) => i);
    expect(store.write('V', { key: 'k', body })).toBe(true);
    expect(store.read('V')).toEqual({ key: 'k', body });
    j.close();
    const db = new Database(join(dir, 'store.sqlite'));
    db.prepare("UPDATE fit_cache SET body = ? WHERE vignette = 'V'").run(Buffer.from(body.map((x, i) => (i === 10 ? x ^ 1 : x))));
    db.close();
    const j2 = Journal.open(join(dir, 'store.sqlite'));
    const store2 = new FitCacheStore(j2, (l) => notes.push(l));
    expect(store2.read('V')).toBeUndefined();
    expect(notes.join('\n')).toMatch(/fit cache of vignette V is damaged \(checksum mismatch\); refitting/);
    expect(checksum(body)).toHaveLength(64);
    j2.close();
  });

  it('a pack holds a track bit for bit; a damaged one is refused', () => {
    const t = sims[0];
    const p = packTrack(7, t.t.length, t.t.length, t);
    const back = unpackTrack(p, t.vignette, t.track, t.values.length) as RawTrack;
    sameBits(t, back);
    const bad = { ...p, body: p.body.map((x, i) => (i === 3 ? x ^ 0x10 : x)) };
    expect(unpackTrack(bad, t.vignette, t.track, t.values.length)).toMatch(/damaged/);
  });
});

describe('fit cache across restarts of the service', () => {
  const feed = (s: RunningServer) => `${s.url.replace(/^http/, 'ws')}/feed`;
  const pValues = (s: RunningServer) =>
    s.service.exportReport().runs.map((r) => ({ track: `${r.vignette}/${r.track}`, overall: r.overall?.pValue, l2: r.statistics?.l2.pValue, score: r.statistics?.score.pValue, residual: r.statistics?.residual.pValue }));

  it('after a restart from the cache, new runs get the p-values of a restart without it', async () => {
    const allSims = (await readTracks(files.baseline, plan)).tracks.filter((t) => t.vignette === VIGNETTE || t.vignette === 'S2-L1');
    const allLive = (await readTracks(files.live, plan)).tracks.filter((t) => t.vignette === VIGNETTE || t.vignette === 'S2-L1');
    const journalPath = join(dir, 'svc.sqlite');
    let s = await startServer({ planPath: files.plan, journalPath, port: 0, refitDelayMs: 20, inProcessCompute: true });
    await replay({ url: feed(s), plan, live: [], sims: allSims, speed: 0 });
    await s.service.settle();
    await s.close();
    const copyPath = join(dir, 'svc-copy.sqlite');
    copyFileSync(journalPath, copyPath);

    // Twice with the cache (the second start must load every fit from it), once without.
    const lines: string[] = [];
    s = await startServer({ journalPath, port: 0, inProcessCompute: true, log: (l) => lines.push(l) });
    await s.close();
    lines.length = 0;
    s = await startServer({ journalPath, port: 0, inProcessCompute: true, log: (l) => lines.push(l) });
    expect(lines.filter((l) => /loaded from the fit cache/.test(l))).toHaveLength(2);
    expect(lines.filter((l) => /refitted|damaged|not written/.test(l))).toEqual([]);
    await replay({ url: feed(s), plan, live: allLive, speed: 0 });
    await s.service.settle();
    const cached = pValues(s);
    await s.close();

    const u = await startServer({ journalPath: copyPath, port: 0, inProcessCompute: true, fitCache: false });
    await replay({ url: feed(u), plan, live: allLive, speed: 0 });
    await u.service.settle();
    const uncached = pValues(u);
    await u.close();

    expect(cached.length).toBe(allLive.length);
    sameBits(uncached, cached);
    const batch = assessEvent(plan.vignettes, plan.channels, plan.analysis, allSims, allLive);
    for (const r of batch.runs) {
      const c = cached.find((x) => x.track === `${r.vignette}/${r.track}`);
      expect(Object.is(c?.overall, r.assessment?.result.pValues.overall), `${r.track}: ${c?.overall} vs ${r.assessment?.result.pValues.overall}`).toBe(true);
    }
  }, 120_000);

  it('a stale entry and a damaged pack are refitted and reread with a log line; a failed cache write keeps the service serving', async () => {
    const someSims = (await readTracks(files.baseline, plan)).tracks.filter((t) => t.vignette === VIGNETTE);
    const journalPath = join(dir, 'svc2.sqlite');
    let s = await startServer({ planPath: files.plan, journalPath, port: 0, refitDelayMs: 20, inProcessCompute: true });
    await replay({ url: feed(s), plan, live: [], sims: someSims, speed: 0 });
    await s.service.settle();
    await s.close();

    // Stale: the entry's key no longer matches; damaged: a pack's bytes flipped.
    const db = new Database(journalPath);
    db.prepare("UPDATE fit_cache SET key = 'an older key' WHERE vignette = ?").run(VIGNETTE);
    const row = db.prepare('SELECT track_id, body FROM sim_pack LIMIT 1').get() as { track_id: number; body: Buffer };
    row.body[5] ^= 0xff;
    db.prepare('UPDATE sim_pack SET body = ? WHERE track_id = ?').run(row.body, row.track_id);
    db.close();

    const lines: string[] = [];
    s = await startServer({ journalPath, port: 0, inProcessCompute: true, log: (l) => lines.push(l) });
    expect(lines.join('\n')).toMatch(/fit cache of vignette S1-L1 is stale .*; refitted/);
    expect(lines.join('\n')).toMatch(/is damaged \(CRC-32 mismatch\); reading its points/);
    expect(s.service.snapshot().vignettes.find((v) => v.id === VIGNETTE)?.baseline).toMatchObject({ status: 'ready', sims: someSims.length });
    await s.close();

    // A full disk for the cache only: the fit is served, points are still acknowledged.
    const proto = Journal.prototype as unknown as { saveFitCache: (...a: unknown[]) => void };
    const original = proto.saveFitCache;
    proto.saveFitCache = () => {
      throw Object.assign(new Error('database or disk is full'), { code: 'SQLITE_FULL' });
    };
    try {
      const db2 = new Database(journalPath);
      db2.exec('DELETE FROM fit_cache');
      db2.close();
      lines.length = 0;
      s = await startServer({ journalPath, port: 0, inProcessCompute: true, log: (l) => lines.push(l) });
      expect(lines.join('\n')).toMatch(/fit cache of vignette S1-L1 not written: the disk is full \(SQLITE_FULL/);
      expect(s.service.snapshot().vignettes.find((v) => v.id === VIGNETTE)?.baseline.status).toBe('ready');
      const run = live[0];
      const summary = await replay({ url: feed(s), plan, live: [run], speed: 0 });
      expect(summary.errors).toBe(0);
      expect(summary.points).toBe(run.t.length);
      await s.service.settle();
      expect(s.service.exportReport().runs.find((r) => r.track === run.track)?.overall?.pValue).toBeGreaterThan(0);
      await s.close();
    } finally {
      proto.saveFitCache = original;
    }
  }, 120_000);
});
