/**
 * A full disk and a read-only journal: the service stops acknowledging with JOURNAL_UNAVAILABLE
 * (to producers, on /healthz and to dashboards), loses nothing it acknowledged, keeps serving, and
 * acknowledges again once space returns.
 *
 * Where the machine allows it (root, mount permitted) the journal lives on a real size-limited
 * filesystem: a 6 MiB tmpfs mounted for the test, filled with a filler file until writes fail
 * with ENOSPC, then freed. Elsewhere (or with PLUMBLINE_DISK_INJECT=1) the same test runs with a fault-injecting journal (its commit
 * throws SQLite's SQLITE_FULL until space "returns"); the test prints which one it used. A
 * read-only journal is always fault-injected while the service runs (Linux refuses to remount a
 * filesystem read-only while a file on it is open for writing), and is real at start-up (a
 * read-only tmpfs) when mounting is permitted.
 */
import { execFileSync } from 'node:child_process';
import { closeSync, copyFileSync, mkdirSync, mkdtempSync, openSync, rmSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { feedClient, type Reply } from '../../support/feed-client.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { JournalError } from '../../../ingest/service/journal.js';
import { startServer, type RunningServer } from '../../../ingest/service/server.js';
import { DIST, ensureDashboardBuilt, launchChromium } from '../../dashboard/support/browser.js';

/** Replies here may wait behind a filling disk: 15 s. */
async function client(url: string) {
  const c = await feedClient(url);
  return { ws: c.ws, replies: c.replies, next: (pred: (r: Reply) => boolean) => c.next(pred, 15_000) };
}

const dir = mkdtempSync(join(tmpdir(), 'plumbline-disk-'));
const mnt = join(dir, 'mnt');
let mounted = false;
let planPath: string;

function tryMount(options: string): boolean {
  try {
    execFileSync('mount', ['-t', 'tmpfs', '-o', options, 'tmpfs', mnt], { stdio: 'pipe' });
    return true;
  } catch {
    return false;
  }
}
function unmount(): void {
  try {
    execFileSync('umount', [mnt], { stdio: 'pipe' });
  } catch {
    // not mounted
  }
}

beforeAll(async () => {
  planPath = (await writeDemoFiles(join(dir, 'demo'), { seed: 4, simsPerVignette: 1 })).plan;
  mkdirSync(mnt, { recursive: true });
  mounted = !process.env.PLUMBLINE_DISK_INJECT && tryMount('size=6m');
  console.log(mounted ? 'disk test: a real 6 MiB tmpfs (size-limited filesystem)' : 'disk test: mounting is not permitted here; a fault-injecting journal stands in for the full disk');
});
afterAll(() => {
  unmount();
  rmSync(dir, { recursive: true, force: true });
});

const V = 'S1-L1';
const pt = (seq: number) => ({ seq, t: seq * 0.01, values: [2500 - seq * 0.001, 120] });

/** Fill the filesystem of `path` until a write fails (ENOSPC); returns the filler's path. */
function fill(path: string): string {
  const filler = join(path, 'filler.bin');
  const fd = openSync(filler, 'w');
  const block = Buffer.alloc(64 * 1024, 7);
  try {
    for (;;) writeSync(fd, block);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code !== 'ENOSPC') throw e;
  } finally {
    closeSync(fd);
  }
  return filler;
}

/** Make the journal's commits fail with a SQLite error of `code` until the returned function is called. */
function injectFault(server: RunningServer, code: string): () => void {
  const j = server.journal as unknown as Record<string, (...a: unknown[]) => unknown>;
  const saved = { commitPoints: j.commitPoints, closeTrack: j.closeTrack, appendLog: j.appendLog, addTrack: j.addTrack };
  const fail = () => {
    throw Object.assign(new Error(code === 'SQLITE_FULL' ? 'database or disk is full' : 'attempt to write a readonly database'), { code });
  };
  for (const k of Object.keys(saved)) j[k] = fail;
  return () => Object.assign(j, saved);
}

describe('the journal cannot be written', () => {
  it.each(['disk full', 'read-only journal'] as const)('%s: producers and dashboards are told, nothing acknowledged is lost, and acknowledging resumes', async (kind) => {
    const real = kind === 'disk full' && mounted;
    const folder = real ? mnt : join(dir, kind.replace(/ /g, '-'));
    const journalPath = join(folder, 'journal.sqlite');
    if (kind === 'disk full') ensureDashboardBuilt();
    const server = await startServer({ planPath, journalPath, port: 0, inProcessCompute: true, staticDir: DIST });
    // The dashboard in a browser, for the banner (disk-full case only: one browser start is enough).
    const browser = kind === 'disk full' ? await launchChromium() : undefined;
    const page = await browser?.newPage();
    await page?.goto(`${server.url}/`);
    const banner = page?.locator('#journal-fault');
    let release: (() => void) | undefined;
    try {
      const feed = `${server.url.replace('http', 'ws')}/feed`;
      const p = await client(feed);
      const w = await client(`${server.url.replace('http', 'ws')}/watch`);
      await w.next((r) => r.type === 'snapshot');
      p.ws.send(JSON.stringify({ v: 1, type: 'open', id: 'o', vignette: V, track: 'run-1', source: 'live', channels: ['range', 'bearing'] }));
      await p.next((r) => r.id === 'o');
      let acked = 0;
      let sent = 0;
      const batch = async (id: string): Promise<Reply> => {
        const points = Array.from({ length: 200 }, (_, i) => pt(sent + i + 1));
        p.ws.send(JSON.stringify({ v: 1, type: 'points', id, vignette: V, track: 'run-1', points }));
        const r = await p.next((x) => x.id === id);
        if (r.type === 'ack') {
          acked = Number(r.committedSeq);
          sent += 200;
        }
        return r;
      };
      for (let i = 0; i < 5; i++) expect((await batch(`a${i}`)).type).toBe('ack');
      expect(acked).toBe(1000);

      // The failure.
      let filler: string | undefined;
      if (real) filler = fill(mnt);
      else release = injectFault(server, kind === 'disk full' ? 'SQLITE_FULL' : 'SQLITE_READONLY');
      let refused: Reply | undefined;
      for (let i = 0; i < 500 && !refused; i++) {
        const r = await batch(`b${i}`);
        if (r.type === 'error') refused = r;
      }
      expect(refused?.code).toBe('JOURNAL_UNAVAILABLE');
      expect(String(refused?.reason)).toMatch(kind === 'disk full' ? /disk is full/ : /read-only/);
      const ackedBefore = acked;
      // Told everywhere: the dashboard, /healthz; the service still answers.
      const shown = await w.next((r) => r.type === 'journal');
      expect(shown.journal).toMatchObject({ writable: false });
      if (banner) {
        await banner.waitFor({ state: 'visible', timeout: 15_000 });
        expect(await banner.textContent()).toMatch(/Not recording:.*disk is full/s);
      }
      const health = (await (await fetch(`${server.url}/healthz`)).json()) as { ok: boolean; journal: { writable: boolean } };
      expect(health).toMatchObject({ ok: false, journal: { writable: false } });
      expect(((await (await fetch(`${server.url}/api/state`)).json()) as { journal: { writable: boolean } }).journal.writable).toBe(false);
      p.ws.send(JSON.stringify({ v: 1, type: 'ping', id: 'alive' }));
      expect((await p.next((r) => r.id === 'alive')).type).toBe('pong');
      // Still refused while it lasts (the same points, resent).
      expect((await batch('still')).code).toBe('JOURNAL_UNAVAILABLE');
      expect(acked).toBe(ackedBefore);

      // Space returns.
      if (filler) rmSync(filler);
      release?.();
      release = undefined;
      const r = await batch('again');
      expect(r.type).toBe('ack');
      expect(r.committedSeq).toBe(ackedBefore + 200);
      await w.next((x) => x.type === 'journal' && (x.journal as { writable: boolean }).writable === true);
      await banner?.waitFor({ state: 'detached', timeout: 15_000 });
      p.ws.send(JSON.stringify({ v: 1, type: 'close', id: 'c', vignette: V, track: 'run-1', lastSeq: acked }));
      expect((await p.next((x) => x.id === 'c')).type).toBe('closed');
      p.ws.close();
      w.ws.close();
    } finally {
      release?.();
      await browser?.close();
      await server.close();
    }
    // Every acknowledged point is in the journal once, with its data.
    const db = new Database(journalPath, { readonly: true });
    try {
      const rows = db.prepare('SELECT seq, t FROM points ORDER BY seq').all() as Array<{ seq: number; t: number }>;
      const closed = db.prepare('SELECT last_seq FROM tracks').get() as { last_seq: number };
      expect(rows.length).toBe(closed.last_seq);
      expect(rows.every((x, i) => x.seq === i + 1 && x.t === pt(i + 1).t)).toBe(true);
    } finally {
      db.close();
    }
  });

  it('a journal on a read-only filesystem is refused at start with JOURNAL_UNWRITABLE', async () => {
    if (!mounted) {
      console.log('disk test: mounting is not permitted here; the read-only start-up case needs it and was not run');
      return;
    }
    // A journal made elsewhere, copied onto a filesystem then remounted read-only.
    const made = join(dir, 'made.sqlite');
    const s = await startServer({ planPath, journalPath: made, port: 0, inProcessCompute: true });
    await s.close();
    rmSync(join(mnt, 'journal.sqlite'), { force: true });
    copyFileSync(made, join(mnt, 'ro.sqlite'));
    execFileSync('mount', ['-o', 'remount,ro', mnt], { stdio: 'pipe' });
    try {
      const e = await startServer({ journalPath: join(mnt, 'ro.sqlite'), port: 0, inProcessCompute: true }).then(
        async (x) => {
          await x.close();
          return undefined;
        },
        (err: unknown) => err,
      );
      expect(e).toBeInstanceOf(JournalError);
      expect((e as JournalError).code).toBe('JOURNAL_UNWRITABLE');
      expect((e as Error).message).toMatch(/ro\.sqlite/);
    } finally {
      execFileSync('mount', ['-o', 'remount,rw', mnt], { stdio: 'pipe' });
    }
  });
});
