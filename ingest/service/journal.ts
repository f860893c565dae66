/**
 * The journal: every accepted point, track, result, note and flag, committed to SQLite (WAL)
 * before it is acknowledged. On start the service rebuilds its whole state from it.
 *
 * SQLite via better-sqlite3 12 (13 needs Node 22). WAL with synchronous=NORMAL: a committed
 * transaction survives a process crash or kill -9 (it is in the -wal file); after a power loss the
 * last commits may roll back but the file stays consistent (sqlite.org/pragma.html#pragma_synchronous).
 * `durability: 'full'` switches to synchronous=FULL for power-loss safety at a cost in throughput.
 * One writer connection; the SQLite version is checked (≥ 3.51.3, the WAL-reset fix).
 */
import Database from 'better-sqlite3';
import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';

export const JOURNAL_SCHEMA_VERSION = 1;
/** Rows per multi-row INSERT (4 parameters each, well under SQLite's 32766-parameter limit). */
const CHUNK = 250;
/** Rows per multi-row INSERT for the rest of a batch (one-point messages at a high rate). */
const SMALL_CHUNK = 16;
const MIN_SQLITE = [3, 51, 3];
/** The fit cache (./fit-cache.ts): derived data, created on first write, never needed to rebuild the event. */
const FIT_CACHE_TABLE = 'CREATE TABLE IF NOT EXISTS fit_cache(vignette TEXT PRIMARY KEY, key TEXT NOT NULL, checksum TEXT NOT NULL, body BLOB NOT NULL)';
/** Closed simulated tracks packed one row each (./fit-cache.ts): derived from `points`, read instead of them on start. */
const BASELINE_CACHE_TABLES = [
  'CREATE TABLE IF NOT EXISTS baseline_cache(key TEXT PRIMARY KEY, report TEXT NOT NULL)',
  'CREATE TABLE IF NOT EXISTS baseline_track(key TEXT NOT NULL, ord INTEGER NOT NULL, vignette TEXT NOT NULL, track TEXT NOT NULL, n INTEGER NOT NULL, crc INTEGER NOT NULL, body BLOB NOT NULL, PRIMARY KEY(key, ord))',
];
/** A baseline file's track, packed (./baseline-cache.ts). */
export interface BaselineTrackRow {
  readonly ord: number;
  readonly vignette: string;
  readonly track: string;
  readonly n: number;
  readonly crc: number;
  readonly body: Uint8Array;
}
const SIM_PACK_TABLE = 'CREATE TABLE IF NOT EXISTS sim_pack(track_id INTEGER PRIMARY KEY, last_seq INTEGER NOT NULL, committed_seq INTEGER NOT NULL, n INTEGER NOT NULL, crc INTEGER NOT NULL, body BLOB NOT NULL)';

export interface SimPack {
  readonly trackId: number;
  readonly lastSeq: number;
  /** The track's contiguous committed sequence number (its resume point). */
  readonly committedSeq: number;
  /** Points in the pack. */
  readonly n: number;
  /** CRC-32 of the body. */
  readonly crc: number;
  readonly body: Uint8Array;
}

export interface JournalTrack {
  readonly id: number;
  readonly vignette: string;
  readonly track: string;
  readonly source: 'live' | 'sim';
  readonly channels: string[];
  readonly openedAt: number;
  readonly closedAt: number | null;
  readonly lastSeq: number | null;
}

export interface JournalPoint {
  readonly trackId: number;
  readonly seq: number;
  readonly t: number;
  readonly values: Float64Array;
}

export interface JournalLogEntry {
  readonly id: number;
  readonly at: number;
  readonly kind: string;
  readonly vignette: string | null;
  readonly track: string | null;
  readonly t: number | null;
  readonly body: unknown;
}

export class JournalError extends Error {
  constructor(readonly code: 'JOURNAL_UNWRITABLE' | 'JOURNAL_VERSION' | 'JOURNAL_SQLITE' | 'JOURNAL_PLAN_MISMATCH', message: string) {
    super(message);
    this.name = 'JournalError';
  }
}

/**
 * Is this error the journal failing to write (disk full, read-only file or folder, I/O error),
 * as opposed to a bug? better-sqlite3 raises SqliteError with SQLite's extended result code name
 * (sqlite.org/rescode.html: SQLITE_FULL, SQLITE_READONLY_*, SQLITE_IOERR_*, SQLITE_CANTOPEN).
 */
export function journalWriteFailure(e: unknown): string | undefined {
  const code = typeof e === 'object' && e !== null && 'code' in e ? String((e as { code: unknown }).code) : '';
  if (!/^SQLITE_(FULL|READONLY|IOERR|CANTOPEN)/.test(code)) return undefined;
  const what = code.startsWith('SQLITE_FULL') ? 'the disk is full' : code.startsWith('SQLITE_READONLY') ? 'the journal is read-only' : code.startsWith('SQLITE_CANTOPEN') ? 'the journal file cannot be opened' : 'the disk failed a read or write';
  return `${what} (${code}: ${e instanceof Error ? e.message : String(e)})`;
}

function versionAtLeast(v: string, min: number[]): boolean {
  const parts = v.split('.').map(Number);
  for (let i = 0; i < min.length; i++) {
    if ((parts[i] ?? 0) > min[i]) return true;
    if ((parts[i] ?? 0) < min[i]) return false;
  }
  return true;
}

export class Journal {
  private readonly db: Database.Database;
  private readonly insertPoint: Database.Statement;
  private readonly insertTrack: Database.Statement;
  private readonly closeStmt: Database.Statement;
  private readonly resultStmt: Database.Statement;
  private readonly logStmt: Database.Statement;
  private readonly metaStmt: Database.Statement;
  private readonly commitMany: (points: readonly JournalPoint[]) => void;

  private constructor(db: Database.Database) {
    this.db = db;
    this.insertPoint = db.prepare('INSERT OR IGNORE INTO points(track_id, seq, t, v) VALUES (?, ?, ?, ?)');
    this.insertTrack = db.prepare('INSERT INTO tracks(vignette, track, source, channels, opened_at) VALUES (?, ?, ?, ?, ?)');
    this.closeStmt = db.prepare('UPDATE tracks SET closed_at = ?, last_seq = ? WHERE id = ?');
    this.resultStmt = db.prepare('INSERT OR REPLACE INTO results(track_id, body) VALUES (?, ?)');
    this.logStmt = db.prepare('INSERT INTO log(at, kind, vignette, track, t, body) VALUES (?, ?, ?, ?, ?, ?)');
    this.metaStmt = db.prepare('INSERT OR REPLACE INTO meta(key, value) VALUES (?, ?)');
    // Multi-row inserts: one statement call per CHUNK rows (then per SMALL_CHUNK) instead of one per row.
    const multi = (rows: number) => db.prepare(`INSERT OR IGNORE INTO points(track_id, seq, t, v) VALUES ${Array.from({ length: rows }, () => '(?, ?, ?, ?)').join(', ')}`);
    const chunks: Array<[number, Database.Statement, unknown[]]> = [CHUNK, SMALL_CHUNK].map((rows) => [rows, multi(rows), new Array(4 * rows)]);
    const blob = (p: JournalPoint) => Buffer.from(p.values.buffer, p.values.byteOffset, p.values.byteLength);
    this.commitMany = db.transaction((points: readonly JournalPoint[]) => {
      let i = 0;
      for (const [rows, stmt, params] of chunks) {
        for (; i + rows <= points.length; i += rows) {
          for (let k = 0; k < rows; k++) {
            const p = points[i + k];
            params[4 * k] = p.trackId;
            params[4 * k + 1] = p.seq;
            params[4 * k + 2] = p.t;
            params[4 * k + 3] = blob(p);
          }
          stmt.run(params);
        }
      }
      for (; i < points.length; i++) {
        const p = points[i];
        this.insertPoint.run(p.trackId, p.seq, p.t, blob(p));
      }
    });
  }

  static open(path: string, options: { durability?: 'normal' | 'full' } = {}): Journal {
    let db: Database.Database;
    try {
      if (path !== ':memory:') mkdirSync(dirname(path), { recursive: true });
      db = new Database(path);
    } catch (e) {
      throw new JournalError('JOURNAL_UNWRITABLE', `cannot open the journal ${path}: ${e instanceof Error ? e.message : String(e)}`);
    }
    let version: string;
    try {
      version = (db.prepare('SELECT sqlite_version() AS v').get() as { v: string }).v;
    } catch (e) {
      db.close();
      throw new JournalError('JOURNAL_UNWRITABLE', `cannot open the journal ${path}: ${journalWriteFailure(e) ?? (e instanceof Error ? e.message : String(e))}`);
    }
    if (!versionAtLeast(version, MIN_SQLITE)) {
      db.close();
      throw new JournalError('JOURNAL_SQLITE', `SQLite ${version} is older than ${MIN_SQLITE.join('.')} (WAL-reset bug)`);
    }
    try {
      db.pragma('journal_mode = WAL');
      db.pragma(`synchronous = ${options.durability === 'full' ? 'FULL' : 'NORMAL'}`);
      db.exec(`
        CREATE TABLE IF NOT EXISTS meta(key TEXT PRIMARY KEY, value TEXT NOT NULL);
        CREATE TABLE IF NOT EXISTS tracks(
          id INTEGER PRIMARY KEY, vignette TEXT NOT NULL, track TEXT NOT NULL, source TEXT NOT NULL,
          channels TEXT NOT NULL, opened_at REAL NOT NULL, closed_at REAL, last_seq INTEGER,
          UNIQUE(vignette, track));
        CREATE TABLE IF NOT EXISTS points(
          track_id INTEGER NOT NULL, seq INTEGER NOT NULL, t REAL NOT NULL, v BLOB NOT NULL,
          PRIMARY KEY(track_id, seq)) WITHOUT ROWID;
        CREATE TABLE IF NOT EXISTS results(track_id INTEGER PRIMARY KEY, body TEXT NOT NULL);
        CREATE TABLE IF NOT EXISTS log(
          id INTEGER PRIMARY KEY, at REAL NOT NULL, kind TEXT NOT NULL, vignette TEXT, track TEXT, t REAL, body TEXT NOT NULL);
      `);
    } catch (e) {
      db.close();
      throw new JournalError('JOURNAL_UNWRITABLE', `cannot prepare the journal ${path}: ${e instanceof Error ? e.message : String(e)}`);
    }
    const j = new Journal(db);
    const stored = j.getMeta('schemaVersion');
    if (stored !== undefined && Number(stored) !== JOURNAL_SCHEMA_VERSION) {
      db.close();
      throw new JournalError('JOURNAL_VERSION', `journal ${path} has schema version ${stored}; this build reads ${JOURNAL_SCHEMA_VERSION}`);
    }
    try {
      j.setMeta('schemaVersion', String(JOURNAL_SCHEMA_VERSION));
    } catch (e) {
      db.close();
      throw new JournalError('JOURNAL_UNWRITABLE', `cannot write to the journal ${path}: ${journalWriteFailure(e) ?? (e instanceof Error ? e.message : String(e))}`);
    }
    return j;
  }

  /**
   * A private in-memory copy of a journal file, for reading an event without touching the file:
   * the file is opened read-only, serialized, and the copy is what the returned journal reads and
   * writes (a restore may judge runs that were never judged; those writes stay in memory).
   */
  static snapshot(path: string): Journal {
    let copy: Database.Database;
    try {
      const file = new Database(path, { readonly: true, fileMustExist: true });
      try {
        // Reading the schema fails at once on a file that is not an SQLite database.
        file.prepare('SELECT count(*) FROM sqlite_master').get();
        const image = file.serialize();
        // A WAL-mode file (header bytes 18-19 = 2) cannot be opened from memory; the copy is
        // marked as a rollback-journal database (sqlite.org/fileformat.html, "File format version numbers").
        image[18] = 1;
        image[19] = 1;
        copy = new Database(image);
      } finally {
        file.close();
      }
    } catch (e) {
      const reason = e instanceof Error ? e.message : String(e);
      if (/not a database/.test(reason)) throw new JournalError('JOURNAL_VERSION', `${path} is not a plumbline journal: ${reason}`);
      throw new JournalError('JOURNAL_UNWRITABLE', `cannot read the journal ${path}: ${reason}`);
    }
    let j: Journal;
    try {
      j = new Journal(copy);
    } catch (e) {
      copy.close();
      throw new JournalError('JOURNAL_VERSION', `${path} is not a plumbline journal: ${e instanceof Error ? e.message : String(e)}`);
    }
    const stored = j.getMeta('schemaVersion');
    if (stored === undefined || Number(stored) !== JOURNAL_SCHEMA_VERSION) {
      copy.close();
      throw new JournalError('JOURNAL_VERSION', `${path} is not a plumbline journal of schema version ${JOURNAL_SCHEMA_VERSION} (found ${stored ?? 'none'})`);
    }
    return j;
  }

  get sqliteVersion(): string {
    return (this.db.prepare('SELECT sqlite_version() AS v').get() as { v: string }).v;
  }

  getMeta(key: string): string | undefined {
    const row = this.db.prepare('SELECT value FROM meta WHERE key = ?').get(key) as { value: string } | undefined;
    return row?.value;
  }

  setMeta(key: string, value: string): void {
    this.metaStmt.run(key, value);
  }

  addTrack(vignette: string, track: string, source: 'live' | 'sim', channels: readonly string[], at: number): number {
    const r = this.insertTrack.run(vignette, track, source, JSON.stringify(channels), at);
    return Number(r.lastInsertRowid);
  }

  /** Commit a batch of accepted points in one transaction (duplicates by (track, seq) are ignored). */
  commitPoints(points: readonly JournalPoint[]): void {
    if (points.length > 0) this.commitMany(points);
  }

  closeTrack(trackId: number, lastSeq: number, at: number): void {
    this.closeStmt.run(at, lastSeq, trackId);
  }

  saveResult(trackId: number, body: unknown): void {
    this.resultStmt.run(trackId, JSON.stringify(body));
  }

  appendLog(at: number, kind: string, vignette: string | null, track: string | null, t: number | null, body: unknown): number {
    return Number(this.logStmt.run(at, kind, vignette, track, t, JSON.stringify(body)).lastInsertRowid);
  }

  tracks(): JournalTrack[] {
    const rows = this.db.prepare('SELECT id, vignette, track, source, channels, opened_at, closed_at, last_seq FROM tracks ORDER BY id').all() as Array<{
      id: number; vignette: string; track: string; source: 'live' | 'sim'; channels: string; opened_at: number; closed_at: number | null; last_seq: number | null;
    }>;
    return rows.map((r) => ({ id: r.id, vignette: r.vignette, track: r.track, source: r.source, channels: JSON.parse(r.channels) as string[], openedAt: r.opened_at, closedAt: r.closed_at, lastSeq: r.last_seq }));
  }

  /** All points of all tracks (but those of `except`), in (track, seq) order, one callback per point (bounded memory). */
  eachPoint(fn: (p: JournalPoint) => void, except?: ReadonlySet<number>): void {
    const skip = except && except.size > 0;
    const sql = `SELECT track_id, seq, t, v FROM points${skip ? ' WHERE track_id NOT IN (SELECT value FROM json_each(?))' : ''} ORDER BY track_id, seq`;
    const stmt = this.db.prepare(sql);
    for (const row of (skip ? stmt.iterate(JSON.stringify([...except])) : stmt.iterate()) as Iterable<{ track_id: number; seq: number; t: number; v: Buffer }>) {
      const copy = new Float64Array(row.v.byteLength / 8);
      new Uint8Array(copy.buffer).set(row.v);
      fn({ trackId: row.track_id, seq: row.seq, t: row.t, values: copy });
    }
  }

  /** The fit cache entry of a vignette (./fit-cache.ts), if any; a journal without the table has none. */
  fitCache(vignette: string): { key: string; checksum: string; body: Uint8Array } | undefined {
    if (!this.hasTable('fit_cache')) return undefined;
    const row = this.db.prepare('SELECT key, checksum, body FROM fit_cache WHERE vignette = ?').get(vignette) as { key: string; checksum: string; body: Buffer } | undefined;
    return row ? { key: row.key, checksum: row.checksum, body: new Uint8Array(row.body.buffer, row.body.byteOffset, row.body.byteLength) } : undefined;
  }

  saveFitCache(vignette: string, key: string, checksum: string, body: Uint8Array): void {
    this.db.exec(FIT_CACHE_TABLE);
    this.db.prepare('INSERT OR REPLACE INTO fit_cache(vignette, key, checksum, body) VALUES (?, ?, ?, ?)').run(vignette, key, checksum, Buffer.from(body.buffer, body.byteOffset, body.byteLength));
  }

  private hasTable(name: string): boolean {
    return this.db.prepare("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?").get(name) !== undefined;
  }

  /** Every packed simulated track (./fit-cache.ts), by track id; none in a journal without the table. */
  simPacks(): Map<number, SimPack> {
    if (!this.hasTable('sim_pack')) return new Map();
    const rows = this.db.prepare('SELECT track_id, last_seq, committed_seq, n, crc, body FROM sim_pack').all() as Array<{ track_id: number; last_seq: number; committed_seq: number; n: number; crc: number; body: Buffer }>;
    return new Map(rows.map((r) => [r.track_id, { trackId: r.track_id, lastSeq: r.last_seq, committedSeq: r.committed_seq, n: r.n, crc: r.crc, body: new Uint8Array(r.body.buffer, r.body.byteOffset, r.body.byteLength) }]));
  }

  /** Store packs of closed simulated tracks in one transaction. */
  saveSimPacks(packs: readonly SimPack[]): void {
    if (packs.length === 0) return;
    this.db.exec(SIM_PACK_TABLE);
    const stmt = this.db.prepare('INSERT OR REPLACE INTO sim_pack(track_id, last_seq, committed_seq, n, crc, body) VALUES (?, ?, ?, ?, ?, ?)');
    this.db.transaction(() => {
      for (const p of packs) stmt.run(p.trackId, p.lastSeq, p.committedSeq, p.n, p.crc, Buffer.from(p.body.buffer, p.body.byteOffset, p.body.byteLength));
    })();
  }

  /** The cached read of a baseline file with this key (./baseline-cache.ts), in file order. */
  baselineCache(key: string): { report: string; tracks: BaselineTrackRow[] } | undefined {
    if (!this.hasTable('baseline_cache') || !this.hasTable('baseline_track')) return undefined;
    const head = this.db.prepare('SELECT report FROM baseline_cache WHERE key = ?').get(key) as { report: string } | undefined;
    if (!head) return undefined;
    const rows = this.db.prepare('SELECT ord, vignette, track, n, crc, body FROM baseline_track WHERE key = ? ORDER BY ord').all(key) as Array<{ ord: number; vignette: string; track: string; n: number; crc: number; body: Buffer }>;
    return { report: head.report, tracks: rows.map((r) => ({ ord: r.ord, vignette: r.vignette, track: r.track, n: r.n, crc: r.crc, body: new Uint8Array(r.body.buffer, r.body.byteOffset, r.body.byteLength) })) };
  }

  /** Replace the baseline cache by this file's read, in one transaction (other keys are dropped). */
  saveBaselineCache(key: string, report: string, tracks: readonly BaselineTrackRow[]): void {
    for (const sql of BASELINE_CACHE_TABLES) this.db.exec(sql);
    const row = this.db.prepare('INSERT INTO baseline_track(key, ord, vignette, track, n, crc, body) VALUES (?, ?, ?, ?, ?, ?, ?)');
    this.db.transaction(() => {
      this.db.prepare('DELETE FROM baseline_track').run();
      this.db.prepare('DELETE FROM baseline_cache').run();
      for (const t of tracks) row.run(key, t.ord, t.vignette, t.track, t.n, t.crc, Buffer.from(t.body.buffer, t.body.byteOffset, t.body.byteLength));
      this.db.prepare('INSERT INTO baseline_cache(key, report) VALUES (?, ?)').run(key, report);
    })();
  }

  results(): Map<number, unknown> {
    const rows = this.db.prepare('SELECT track_id, body FROM results').all() as Array<{ track_id: number; body: string }>;
    return new Map(rows.map((r) => [r.track_id, JSON.parse(r.body) as unknown]));
  }

  log(): JournalLogEntry[] {
    const rows = this.db.prepare('SELECT id, at, kind, vignette, track, t, body FROM log ORDER BY id').all() as Array<{ id: number; at: number; kind: string; vignette: string | null; track: string | null; t: number | null; body: string }>;
    return rows.map((r) => ({ id: r.id, at: r.at, kind: r.kind, vignette: r.vignette, track: r.track, t: r.t, body: JSON.parse(r.body) as unknown }));
  }

  close(): void {
    if (!this.db.open) return;
    try {
      this.db.pragma('wal_checkpoint(TRUNCATE)');
    } catch {
      // a full or read-only disk: the WAL stays beside the file and is replayed on the next open
    } finally {
      this.db.close();
    }
  }
}
