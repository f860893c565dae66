/**
 * The fit cache: what a vignette's baseline fit costs (the simulated runs smoothed onto the grid,
 * the model summary's FPCA, the projection model with its cross-fitting folds, the full window's
 * calibration reference with its leave-one-out statistics), stored in the journal so that a
 * restart loads it instead of refitting.
 *
 * An entry is used only when its content key matches: a SHA-256 over the cache format, the
 * vignette, the plan's channels and analysis settings, and every simulated run the fit would use
 * (track id, sample count and the bytes of its times and values, in track-id order). Any change
 * to those (a run added, the plan's settings, an engine change that bumps FIT_CACHE_FORMAT) gives
 * another key and a refit. The body is checked by its own SHA-256 before it is decoded; a damaged
 * or stale entry is refitted and rewritten, with a line in the service log.
 *
 * The body is V8's structured serialization (node:v8 serialize/deserialize): doubles and typed
 * arrays round-trip bit for bit, and an array referenced twice (a curve in the baseline and in a
 * fold of the projection model) is written once and comes back shared.
 *
 * Writing the cache never stands in the way of the journal's own job: a failed write (disk full,
 * read-only) is logged and the service goes on serving from the fit it has.
 */
import { createHash } from 'node:crypto';
import { crc32 } from 'node:zlib';
import { deserialize, serialize } from 'node:v8';
import type { Baseline } from '../../engine/assess.js';
import type { ChannelEnvelope } from '../../engine/envelope.js';
import type { ModelSummary } from '../../engine/event.js';
import type { CalibrationReference } from '../../engine/calibrate.js';
import type { ProjectionModel } from '../../engine/projection.js';
import type { AnalysisSettings, ChannelSpec, RawTrack } from '../../engine/types.js';
import { journalWriteFailure, type Journal, type SimPack } from './journal.js';

/**
 * Bumped whenever the engine changes what a fit computes (smoothing, FPCA, reference, projection)
 * or the layout of the cached body changes: older entries then never match and are refitted.
 */
export const FIT_CACHE_FORMAT = 1;

/** What a fit produced, minus the raw simulated runs (kept by the computation, referred to by id). */
export interface CachedFit {
  readonly format: number;
  readonly baseline: Omit<Baseline, 'sims'>;
  /** Track ids of the baseline's simulated runs, in the order of `baseline.curves`. */
  readonly simIds: readonly string[];
  readonly projection: ProjectionModel;
  readonly fullWindow: { readonly key: string; readonly curves: readonly Float64Array[]; readonly reference: CalibrationReference };
  readonly summary: ModelSummary;
  readonly envelope: ChannelEnvelope[];
}

/** A cache entry as it travels between the journal and the computation. */
export interface FitCacheEntry {
  readonly key: string;
  readonly body: Uint8Array;
}

/** The content key of a vignette's fit (module comment). `sims` must be in track-id order. */
export function fitKey(vignette: { id: string; horizon: number }, channels: readonly ChannelSpec[], analysis: AnalysisSettings, sims: readonly RawTrack[]): string {
  const h = createHash('sha256');
  h.update(JSON.stringify({ format: FIT_CACHE_FORMAT, vignette: vignette.id, horizon: vignette.horizon, channels, analysis, sims: sims.length }));
  const bytes = (a: Float64Array) => new Uint8Array(a.buffer, a.byteOffset, a.byteLength);
  for (const s of sims) {
    h.update(`\u0000${s.track}\u0000${s.t.length}\u0000${s.values.length}\u0000`);
    h.update(bytes(s.t));
    for (const v of s.values) h.update(bytes(v));
  }
  return h.digest('hex');
}

export function encodeFit(fit: CachedFit): Uint8Array {
  return serialize(fit);
}

/** Decode a body; throws when it is not a cached fit of this format. */
export function decodeFit(body: Uint8Array): CachedFit {
  const fit = deserialize(body) as CachedFit;
  if (typeof fit !== 'object' || fit === null || fit.format !== FIT_CACHE_FORMAT || !Array.isArray(fit.simIds) || !fit.baseline || !fit.projection || !fit.fullWindow) {
    throw new Error(`not a fit cache body of format ${FIT_CACHE_FORMAT}`);
  }
  if (fit.simIds.length !== fit.baseline.curves.length) throw new Error('fit cache body: simulated run ids and curves differ in number');
  return fit;
}

export function checksum(body: Uint8Array): string {
  return createHash('sha256').update(body).digest('hex');
}

/**
 * The journal side of the cache: one row per vignette in the journal's `fit_cache` table.
 * `note` receives one line for every entry found damaged and every write that failed.
 */
export class FitCacheStore {
  constructor(
    private readonly journal: Journal,
    readonly note: (line: string) => void = () => undefined,
  ) {}

  /** The stored entry of a vignette when its checksum holds; a damaged one is reported and ignored. */
  read(vignette: string): FitCacheEntry | undefined {
    let row: ReturnType<Journal['fitCache']>;
    try {
      row = this.journal.fitCache(vignette);
    } catch (e) {
      this.note(`fit cache of vignette ${vignette} unreadable (${e instanceof Error ? e.message : String(e)}); refitting`);
      return undefined;
    }
    if (!row) return undefined;
    if (checksum(row.body) !== row.checksum) {
      this.note(`fit cache of vignette ${vignette} is damaged (checksum mismatch); refitting`);
      return undefined;
    }
    return { key: row.key, body: row.body };
  }

  /** Store a fresh entry; never throws (a failed write is reported and the cache is just missing). */
  write(vignette: string, entry: FitCacheEntry): boolean {
    try {
      this.journal.saveFitCache(vignette, entry.key, checksum(entry.body), entry.body);
      return true;
    } catch (e) {
      const why = journalWriteFailure(e) ?? (e instanceof Error ? e.message : String(e));
      this.note(`fit cache of vignette ${vignette} not written: ${why}; the next start refits it`);
      return false;
    }
  }
}

/**
 * A closed simulated track as one row: its times then each channel's values (as the service hands
 * them to the computation: sorted by time, circular channels unwrapped), float64, little-endian as
 * in memory. Read on start instead of the track's points; the points stay the record.
 */
export function packTrack(trackId: number, lastSeq: number, committedSeq: number, raw: RawTrack): SimPack {
  const n = raw.t.length;
  const all = new Float64Array(n * (1 + raw.values.length));
  all.set(raw.t, 0);
  raw.values.forEach((v, c) => all.set(v, (c + 1) * n));
  const body = new Uint8Array(all.buffer);
  return { trackId, lastSeq, committedSeq, n, crc: crc32(body), body };
}

/** The track of a pack, or a reason it cannot be used (damaged, or not of these channels). */
export function unpackTrack(pack: SimPack, vignette: string, track: string, channels: number): RawTrack | string {
  if (pack.body.byteLength !== 8 * pack.n * (1 + channels)) return `pack of ${vignette}/${track} has ${pack.body.byteLength} bytes, not ${8 * pack.n * (1 + channels)}`;
  if (crc32(pack.body) !== pack.crc) return `pack of ${vignette}/${track} is damaged (CRC-32 mismatch)`;
  const all = new Float64Array(pack.n * (1 + channels));
  new Uint8Array(all.buffer).set(pack.body);
  const n = pack.n;
  return { vignette, track, t: all.subarray(0, n), values: Array.from({ length: channels }, (_, c) => all.subarray((c + 1) * n, (c + 2) * n)) };
}
