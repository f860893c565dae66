/**
 * The baseline file's cache (ingest/service/baseline-cache.ts). The reference is the file itself:
 * `readTracks` (ingest/tracks-reader.ts) on the same file and plan, compared value by value with
 * Object.is. A start from the cache must give exactly what reading the file gives.
 */
import { appendFileSync, copyFileSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RawTrack } from '../../../engine/types.js';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../../ingest/plan.js';
import { baselineKey, readBaseline } from '../../../ingest/service/baseline-cache.js';
import { Journal } from '../../../ingest/service/journal.js';
import { readTracks } from '../../../ingest/tracks-reader.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-basecache-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

let plan: EventPlan;
let files: Awaited<ReturnType<typeof writeDemoFiles>>;

beforeAll(async () => {
  files = await writeDemoFiles(join(dir, 'demo'), { seed: 3, simsPerVignette: 6, liveRunsPerVignette: 1 });
  plan = await loadPlan(files.plan);
});

function sameTracks(a: readonly RawTrack[], b: readonly RawTrack[]): void {
  expect(b.map((t) => `${t.vignette}/${t.track}`)).toEqual(a.map((t) => `${t.vignette}/${t.track}`));
  a.forEach((x, i) => {
    const y = b[i];
    expect(y.t.length).toBe(x.t.length);
    for (let k = 0; k < x.t.length; k++) if (!Object.is(x.t[k], y.t[k])) throw new Error(`${x.track} t[${k}]: ${x.t[k]} !== ${y.t[k]}`);
    x.values.forEach((col, c) => {
      for (let k = 0; k < col.length; k++) if (!Object.is(col[k], y.values[c][k])) throw new Error(`${x.track} values[${c}][${k}]`);
    });
  });
}

function journalAt(name: string): Journal {
  return Journal.open(join(dir, name));
}

describe('baseline file cache', () => {
  it('a second read comes from the cache and equals reading the file, value for value', async () => {
    const journal = journalAt('a.sqlite');
    const lines: string[] = [];
    const first = await readBaseline(journal, files.baseline, plan, { log: (l) => lines.push(l) });
    const second = await readBaseline(journal, files.baseline, plan, { log: (l) => lines.push(l) });
    journal.close();
    const reference = await readTracks(files.baseline, plan);
    expect(first.fromCache).toBe(false);
    expect(second.fromCache).toBe(true);
    expect(lines).toEqual([]);
    sameTracks(reference.tracks, first.tracks);
    sameTracks(reference.tracks, second.tracks);
    expect(second.report).toEqual(reference.report);
  });

  it('a changed file or a changed plan gives another key, and the file is read again', async () => {
    const copy = join(dir, 'changed.csv');
    copyFileSync(files.baseline, copy);
    const journal = journalAt('b.sqlite');
    await readBaseline(journal, copy, plan);
    const before = await baselineKey(copy, plan);
    appendFileSync(copy, '\n');
    expect(await baselineKey(copy, plan)).not.toBe(before);
    const again = await readBaseline(journal, copy, plan);
    expect(again.fromCache).toBe(false);
    const otherPlan: EventPlan = { ...plan, vignettes: plan.vignettes.map((v, i) => (i === 0 ? { ...v, horizon: v.horizon + 1 } : v)) };
    expect(await baselineKey(copy, otherPlan)).not.toBe(await baselineKey(copy, plan));
    journal.close();
  });

  it('a damaged packed track is refused by its CRC-32, logged, and the file is read', async () => {
    const path = join(dir, 'c.sqlite');
    const journal = journalAt('c.sqlite');
    await readBaseline(journal, files.baseline, plan);
    journal.close();
    const db = new Database(path);
    const row = db.prepare('SELECT ord, body FROM baseline_track ORDER BY ord LIMIT 1 OFFSET 3').get() as { ord: number; body: Buffer };
    row.body[17] ^= 0x40;
    db.prepare('UPDATE baseline_track SET body = ? WHERE ord = ?').run(row.body, row.ord);
    db.close();
    const reopened = journalAt('c.sqlite');
    const lines: string[] = [];
    const read = await readBaseline(reopened, files.baseline, plan, { log: (l) => lines.push(l) });
    expect(read.fromCache).toBe(false);
    expect(lines.join('\n')).toMatch(/CRC-32/);
    sameTracks((await readTracks(files.baseline, plan)).tracks, read.tracks);
    // The bad cache was rewritten by that read: the next start uses it again.
    expect((await readBaseline(reopened, files.baseline, plan)).fromCache).toBe(true);
    reopened.close();
  });

  it('a cache that cannot be written is logged and the read goes on', async () => {
    const journal = journalAt('d.sqlite');
    // Fault injection on the one write the cache makes (the disk tests cover a real full disk).
    const failing = journal;
    failing.saveBaselineCache = () => {
      throw Object.assign(new Error('database or disk is full'), { code: 'SQLITE_FULL' });
    };
    const lines: string[] = [];
    const read = await readBaseline(failing, files.baseline, plan, { log: (l) => lines.push(l) });
    expect(read.fromCache).toBe(false);
    expect(read.tracks.length).toBe(read.report.tracks);
    expect(lines.join('\n')).toMatch(/not written.*disk is full/);
    journal.close();
  });
});
