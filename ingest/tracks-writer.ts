/**
 * Writers for track files in the formats of tracks-reader.ts (long CSV and NDJSON). Numbers are
 * written with String(x), the shortest text that reads back to the same double, and -0 as "-0",
 * so a write followed by a read gives the same values bit for bit. Files are written line by line
 * in chunks of about 64 KiB through stream.pipeline (backpressure), never as one huge string.
 */
import { createWriteStream } from 'node:fs';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type { ChannelSpec, RawTrack } from '../engine/types.js';

/** Characters gathered before a chunk is handed to the file stream. */
const CHUNK_CHARS = 1 << 16;

/** A finite number as text that reads back exactly (Number(text) === x, sign of zero kept). */
function num(x: number): string {
  if (!Number.isFinite(x)) throw new RangeError(`cannot write a non-finite value (${x})`);
  return Object.is(x, -0) ? '-0' : String(x);
}

/** An id must survive an unquoted CSV field that the reader trims. */
function csvIdProblem(id: string): boolean {
  return id === '' || id.trim() !== id || /[,"\r\n]/.test(id);
}

/**
 * Check everything before the first byte is written, so that a bad track does not leave a partial
 * file: array shapes, finite values and (for CSV) ids that need no quoting. Throws RangeError.
 */
function validate(tracks: readonly RawTrack[], channels: readonly ChannelSpec[], csv: boolean): void {
  for (const track of tracks) {
    const name = `track ${JSON.stringify(track.vignette)}/${JSON.stringify(track.track)}`;
    if (csv && (csvIdProblem(track.vignette) || csvIdProblem(track.track))) {
      throw new RangeError(`${name}: ids cannot be written to CSV (empty, surrounding spaces, comma, quote or line break)`);
    }
    if (track.values.length !== channels.length) {
      throw new RangeError(`${name}: ${track.values.length} value arrays for ${channels.length} channels`);
    }
    for (const a of [track.t, ...track.values]) {
      if (a.length !== track.t.length) throw new RangeError(`${name}: value and time arrays differ in length`);
      for (let i = 0; i < a.length; i++) {
        if (!Number.isFinite(a[i])) throw new RangeError(`${name}: non-finite value (${a[i]}) at sample ${i}`);
      }
    }
  }
}

/** CSV lines (each ending in '\n'), header first. */
function* csvLines(tracks: readonly RawTrack[], channels: readonly ChannelSpec[]): Generator<string> {
  yield `vignette,track,t${channels.map((c) => `,${c.name}`).join('')}\n`;
  for (const track of tracks) {
    const prefix = `${track.vignette},${track.track},`;
    for (let i = 0; i < track.t.length; i++) {
      let line = prefix + num(track.t[i]);
      for (const v of track.values) line += `,${num(v[i])}`;
      yield `${line}\n`;
    }
  }
}

/** NDJSON lines (each ending in '\n'): {"vignette":..,"track":..,"t":..,<channel>:..}. */
function* ndjsonLines(tracks: readonly RawTrack[], channels: readonly ChannelSpec[]): Generator<string> {
  const keys = channels.map((c) => `,${JSON.stringify(c.name)}:`);
  for (const track of tracks) {
    const prefix = `{"vignette":${JSON.stringify(track.vignette)},"track":${JSON.stringify(track.track)},"t":`;
    for (let i = 0; i < track.t.length; i++) {
      let line = prefix + num(track.t[i]);
      for (let c = 0; c < keys.length; c++) line += keys[c] + num(track.values[c][i]);
      yield `${line}}\n`;
    }
  }
}

/** Group lines into chunks of about CHUNK_CHARS characters. */
function* chunks(lines: Iterable<string>): Generator<string> {
  let chunk = '';
  for (const line of lines) {
    chunk += line;
    if (chunk.length >= CHUNK_CHARS) {
      yield chunk;
      chunk = '';
    }
  }
  if (chunk !== '') yield chunk;
}

/** Write lines to a file in chunks; pipeline handles backpressure, errors and closing the file. */
async function writeLines(path: string, lines: Iterable<string>): Promise<void> {
  await pipeline(Readable.from(chunks(lines)), createWriteStream(path, { encoding: 'utf8' }));
}

/** The whole CSV text of some tracks (header `vignette,track,t,<channels>`); for small data and tests. */
export function formatTracksCsv(tracks: readonly RawTrack[], channels: readonly ChannelSpec[]): string {
  validate(tracks, channels, true);
  return [...csvLines(tracks, channels)].join('');
}

/** The whole NDJSON text of some tracks; for small data and tests. */
export function formatTracksNdjson(tracks: readonly RawTrack[], channels: readonly ChannelSpec[]): string {
  validate(tracks, channels, false);
  return [...ndjsonLines(tracks, channels)].join('');
}

/** Stream tracks to a CSV file. Throws RangeError for ids or values that cannot be written. */
export async function writeTracksCsv(path: string, tracks: readonly RawTrack[], channels: readonly ChannelSpec[]): Promise<void> {
  validate(tracks, channels, true);
  await writeLines(path, csvLines(tracks, channels));
}

/** Stream tracks to an NDJSON file. Throws RangeError for values that cannot be written. */
export async function writeTracksNdjson(
  path: string,
  tracks: readonly RawTrack[],
  channels: readonly ChannelSpec[],
): Promise<void> {
  validate(tracks, channels, false);
  await writeLines(path, ndjsonLines(tracks, channels));
}
