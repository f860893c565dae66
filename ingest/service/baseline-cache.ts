/**
 * The baseline file's cache in the journal: the simulated tracks a `--baseline` file gave, packed
 * one row each, so a start on a journal does not parse the file again (parsing the demo's 87 MB CSV
 * took most of a 6 s start; the packs load in a fraction of a second).
 *
 * Key: SHA-256 over `BASELINE_CACHE_FORMAT`, the plan's channels and vignettes (what the reader
 * uses: names, periods, horizons) and every byte of the file, streamed. Any change to the file or to
 * those parts of the plan gives another key, and the file is read again and the cache rewritten.
 * Each packed track carries a CRC-32 (./fit-cache.ts `packTrack`); a row that fails it, or a cache
 * whose row count disagrees with its report, is ignored with a log line and the file is read.
 * The cache is derived data: a failed write (disk full, read-only) is logged and changes nothing.
 */
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import type { EventPlan } from '../plan.js';
import { readTracks, type ReadReport, type ReadResult } from '../tracks-reader.js';
import type { RawTrack } from '../../engine/types.js';
import { packTrack, unpackTrack } from './fit-cache.js';
import type { Journal } from './journal.js';

/** Bump when the reader's output for the same file and plan changes. */
export const BASELINE_CACHE_FORMAT = 1;

/** SHA-256 of the format, the reader-relevant plan and the file's bytes (hex). */
export async function baselineKey(path: string, plan: EventPlan): Promise<string> {
  const h = createHash('sha256');
  h.update(`plumbline baseline cache ${BASELINE_CACHE_FORMAT}\n`);
  h.update(JSON.stringify({ channels: plan.channels, vignettes: plan.vignettes.map((v) => ({ id: v.id, horizon: v.horizon })) }));
  h.update('\n');
  for await (const chunk of createReadStream(path)) h.update(chunk as Buffer);
  return h.digest('hex');
}

/** The cached read of the file with this key, or a reason it can't be used (undefined: none cached). */
export function cachedBaseline(journal: Journal, key: string, channels: number): ReadResult | string | undefined {
  const entry = journal.baselineCache(key);
  if (!entry) return undefined;
  const report = JSON.parse(entry.report) as ReadReport;
  if (entry.tracks.length !== report.tracks) return `the baseline cache holds ${entry.tracks.length} of ${report.tracks} tracks`;
  const tracks: RawTrack[] = [];
  for (const row of entry.tracks) {
    const raw = unpackTrack({ trackId: row.ord, lastSeq: 0, committedSeq: 0, n: row.n, crc: row.crc, body: row.body }, row.vignette, row.track, channels);
    if (typeof raw === 'string') return raw;
    tracks.push(raw);
  }
  return { tracks, report };
}

/**
 * The file's tracks: from the journal's cache when its key matches, else read (and cached).
 * `log` gets one line for a cache that could not be used or written.
 */
export async function readBaseline(
  journal: Journal,
  path: string,
  plan: EventPlan,
  options: { onProgress?: (done: number, total: number) => void; log?: (line: string) => void; cache?: boolean } = {},
): Promise<ReadResult & { readonly fromCache: boolean }> {
  const log = options.log ?? (() => undefined);
  if (options.cache === false) return { ...(await readTracks(path, plan, { onProgress: options.onProgress })), fromCache: false };
  const key = await baselineKey(path, plan);
  const hit = cachedBaseline(journal, key, plan.channels.length);
  if (hit !== undefined && typeof hit !== 'string') return { ...hit, fromCache: true };
  if (typeof hit === 'string') log(`baseline cache not used: ${hit}; reading ${path}`);
  const read = await readTracks(path, plan, { onProgress: options.onProgress });
  try {
    journal.saveBaselineCache(
      key,
      JSON.stringify(read.report),
      read.tracks.map((t, ord) => {
        const p = packTrack(ord, 0, 0, t);
        return { ord, vignette: t.vignette, track: t.track, n: p.n, crc: p.crc, body: p.body };
      }),
    );
  } catch (e) {
    log(`baseline cache not written (${e instanceof Error ? e.message : String(e)}); the next start reads ${path} again`);
  }
  return { ...read, fromCache: false };
}
