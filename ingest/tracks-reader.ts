/**
 * Streaming readers for live track files, long CSV (`vignette,track,t,<channels...>`) or NDJSON (one
 * object per line with the same keys). Lines are read one at a time (fs stream, split by
 * `boundedLines`, which refuses a line over MAX_LINE_CHARS) and each
 * track's samples accumulate in growable Float64Arrays, so memory is about 8 bytes per number, never
 * an object per row. After the file ends each track is sorted by time, exact duplicate times are
 * dropped (the first row read wins) and circular channels are unwrapped (engine/unwrap.ts).
 *
 * Policy: the first bad row throws an InputError with file, line, column and reason; with
 * `skipBadRows` bad rows are skipped and counted, and the first MAX_KEPT_ERRORS are kept.
 * Header problems and empty files always throw.
 */
import { createReadStream } from 'node:fs';
import { stat } from 'node:fs/promises';
import type { RawTrack } from '../engine/types.js';
import { unwrapCircular } from '../engine/unwrap.js';
import { InputError, type InputErrorCode } from './errors.js';
import { MAX_ID_LENGTH, type EventPlan } from './plan.js';

/** Errors kept in the report when bad rows are skipped (all are counted). */
export const MAX_KEPT_ERRORS = 20;
/** Longest accepted track id. */
export const MAX_TRACK_ID_LENGTH = MAX_ID_LENGTH;
/**
 * Largest magnitude of a circular channel value, in periods (a million turns). Far beyond any real
 * track, it keeps unwrapping exact to about 1e-7 of a period and free of overflow.
 */
export const MAX_CIRCULAR_TURNS = 1e6;
/**
 * Longest accepted line, characters. A real row is well under a kilobyte; the limit keeps a file
 * with one endless line (or a header of a million columns) from growing the reader's memory.
 */
export const MAX_LINE_CHARS = 1 << 20;
/** Most unknown or duplicate header columns named in an error message. */
const MAX_LISTED_COLUMNS = 8;
/** Longest excerpt of an offending value quoted in an error message. */
const MAX_QUOTED_CHARS = 40;
/** Initial capacity (samples) of a track buffer; it doubles when full. */
const INITIAL_CAPACITY = 64;

export type TrackFormat = 'csv' | 'ndjson';

export interface ReadOptions {
  /** Skip and count bad rows instead of throwing on the first one. */
  readonly skipBadRows?: boolean;
  /** File format; by default chosen from the file name (.csv, .ndjson, .jsonl). */
  readonly format?: TrackFormat;
}

export interface ReadFileOptions extends ReadOptions {
  /** Called as the file is read (once per chunk of about 64 KiB). */
  readonly onProgress?: (bytesRead: number, totalBytes: number) => void;
}

/**
 * Counts of one read. Every non-blank data line is one of: kept (`accepted`), refused (`skipped`),
 * dropped because its time is beyond the vignette horizon (`beyondHorizon`), or dropped because its
 * track already has a sample at that time (`duplicates`); so rows = accepted + skipped +
 * beyondHorizon + duplicates.
 */
export interface ReadReport {
  readonly file: string;
  readonly rows: number;
  readonly accepted: number;
  readonly skipped: number;
  readonly duplicates: number;
  readonly beyondHorizon: number;
  /** The first MAX_KEPT_ERRORS refused rows (only with skipBadRows). */
  readonly errors: InputError[];
  /** Number of tracks returned. */
  readonly tracks: number;
}

export interface ReadResult {
  readonly tracks: RawTrack[];
  readonly report: ReadReport;
}

/** Choose the format from a file name; InputError 'TRACKS_FORMAT' when the extension is unknown. */
export function formatFromName(fileName: string): TrackFormat {
  if (/\.csv$/i.test(fileName)) return 'csv';
  if (/\.(ndjson|jsonl)$/i.test(fileName)) return 'ndjson';
  throw new InputError('TRACKS_FORMAT', {
    file: fileName,
    reason: 'cannot tell the format from the file name (expected .csv, .ndjson or .jsonl); give the format explicitly',
  });
}

/** Samples of one track in arrival order, in doubling Float64Arrays. */
class TrackBuffer {
  n = 0;
  t: Float64Array = new Float64Array(INITIAL_CAPACITY);
  values: Float64Array[];

  constructor(
    readonly vignetteIndex: number,
    readonly track: string,
    channels: number,
  ) {
    this.values = Array.from({ length: channels }, () => new Float64Array(INITIAL_CAPACITY));
  }

  push(t: number, row: Float64Array): void {
    if (this.n === this.t.length) this.grow();
    this.t[this.n] = t;
    for (let c = 0; c < this.values.length; c++) this.values[c][this.n] = row[c];
    this.n++;
  }

  private grow(): void {
    const grown = (a: Float64Array): Float64Array => {
      const b = new Float64Array(a.length * 2);
      b.set(a);
      return b;
    };
    this.t = grown(this.t);
    this.values = this.values.map(grown);
  }
}

/** Name at most MAX_LISTED_COLUMNS items, then say how many more there are. */
function listed(items: readonly string[]): string {
  const head = items.slice(0, MAX_LISTED_COLUMNS).map(quoted).join(', ');
  return items.length > MAX_LISTED_COLUMNS ? `${head} and ${items.length - MAX_LISTED_COLUMNS} more` : head;
}

/**
 * Split a text stream into lines (LF or CRLF; the line breaks are dropped), refusing any line
 * longer than `maxChars` with InputError 'TRACKS_ROW' (or 'TRACKS_HEADER' for a CSV header) as
 * soon as it passes the limit, without holding the rest of it.
 */
export async function* boundedLines(chunks: AsyncIterable<string>, file: string, maxChars = MAX_LINE_CHARS, firstIsHeader = true): AsyncGenerator<string> {
  let partial = '';
  let lineNo = 1;
  const tooLong = () =>
    new InputError(lineNo === 1 && firstIsHeader ? 'TRACKS_HEADER' : 'TRACKS_ROW', { file, line: lineNo, reason: `line longer than ${maxChars} characters (a row is one sample: vignette, track, t and one value per channel)` });
  for await (const chunk of chunks) {
    let start = 0;
    for (;;) {
      const nl = chunk.indexOf('\n', start);
      if (nl < 0) {
        if (partial.length + chunk.length - start > maxChars) throw tooLong();
        partial += chunk.slice(start);
        break;
      }
      let line = partial + chunk.slice(start, nl);
      partial = '';
      if (line.length > maxChars) throw tooLong();
      if (line.endsWith('\r')) line = line.slice(0, -1);
      yield line;
      lineNo++;
      start = nl + 1;
    }
  }
  if (partial !== '') yield partial.endsWith('\r') ? partial.slice(0, -1) : partial;
}

function quoted(s: string): string {
  return JSON.stringify(s.length > MAX_QUOTED_CHARS ? `${s.slice(0, MAX_QUOTED_CHARS)}...` : s);
}

const DECIMAL = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/**
 * Parse a decimal number strictly: the trimmed text must be a plain decimal literal (optional sign,
 * digits, optional fraction and exponent), then Number() converts it. Returns the number, or the
 * reason it is refused (empty, NaN, infinite or overflowing, hex/octal/binary, anything else).
 */
export function parseDecimal(raw: string): number | string {
  const s = raw.trim();
  if (s === '') return 'empty value';
  if (DECIMAL.test(s)) {
    const x = Number(s);
    return Number.isFinite(x) ? x : `infinite value (${quoted(s)} overflows)`;
  }
  if (/^[+-]?nan$/i.test(s)) return 'NaN is not allowed';
  if (/^[+-]?inf(inity)?$/i.test(s)) return 'infinite value';
  if (/^[+-]?0[xob]/i.test(s)) return `not a decimal number (${quoted(s)})`;
  return `not a number (${quoted(s)})`;
}

/** A JSON value that must be a finite number (NDJSON); returns the number or the reason. */
function jsonNumber(v: unknown): number | string {
  if (typeof v === 'number') return Number.isFinite(v) ? v : 'infinite value';
  if (typeof v === 'string') {
    const r = parseDecimal(v);
    return typeof r === 'number' ? `numbers must not be quoted (${quoted(v)})` : r;
  }
  if (v === null) return 'null is not a number (NaN and Infinity are not allowed)';
  return `not a number (${Array.isArray(v) ? 'array' : typeof v})`;
}

function isRecord(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

/** One validated row: the channel values are in the caller's scratch array (plan channel order). */
interface Row {
  readonly vignetteIndex: number;
  readonly track: string;
  readonly t: number;
}

/** Context shared by the two row parsers. */
interface RowContext {
  readonly file: string;
  readonly plan: EventPlan;
  readonly vignetteIndex: ReadonlyMap<string, number>;
  /** Filled with the row's channel values in plan order. */
  readonly scratch: Float64Array;
  /** Largest accepted |value| per channel (Infinity for linear channels). */
  readonly limits: Float64Array;
}

type RowParser = (line: string, lineNo: number) => Row | InputError;

function rowError(
  ctx: RowContext,
  line: number,
  column: string | number | undefined,
  reason: string,
  code: InputErrorCode = 'TRACKS_ROW',
): InputError {
  return new InputError(code, { file: ctx.file, line, column, reason });
}

/** Checks shared by both formats on the identifying fields; returns the row or the error. */
function checkIds(ctx: RowContext, lineNo: number, vignette: string, track: string, t: number | string): Row | InputError {
  const vi = ctx.vignetteIndex.get(vignette);
  if (vi === undefined) {
    return rowError(ctx, lineNo, 'vignette', `unknown vignette ${quoted(vignette)} (not in the plan)`, 'TRACKS_VIGNETTE_UNKNOWN');
  }
  if (track === '') return rowError(ctx, lineNo, 'track', 'empty track id');
  if (track.length > MAX_TRACK_ID_LENGTH) {
    return rowError(ctx, lineNo, 'track', `track id longer than ${MAX_TRACK_ID_LENGTH} characters`);
  }
  if (typeof t === 'string') return rowError(ctx, lineNo, 't', t);
  if (t < 0) return rowError(ctx, lineNo, 't', `negative time (${t})`);
  return { vignetteIndex: vi, track, t };
}

/** Store a channel value in the scratch row; returns the reason when it is out of range. */
function setValue(ctx: RowContext, c: number, x: number): string | undefined {
  if (Math.abs(x) > ctx.limits[c]) return `circular value out of range (|value| > ${ctx.limits[c]})`;
  ctx.scratch[c] = x;
  return undefined;
}

/** Validate the CSV header and return the parser of the data rows. */
function csvParser(ctx: RowContext, header: string, lineNo: number): RowParser {
  const fail = (reason: string): InputError => new InputError('TRACKS_HEADER', { file: ctx.file, line: lineNo, reason });
  if (header.includes('"')) throw fail('double quotes are not supported in the header');
  const names = header.split(',').map((s) => s.trim());
  const channelNames = ctx.plan.channels.map((c) => c.name);
  const required = ['vignette', 'track', 't', ...channelNames];
  const problems: string[] = [];
  const dup = names.filter((n, i) => names.indexOf(n) !== i);
  if (dup.length > 0) problems.push(`duplicate column(s) ${listed([...new Set(dup)])}`);
  const missing = required.filter((n) => !names.includes(n));
  if (missing.length > 0) problems.push(`missing column(s) ${missing.map(quoted).join(', ')}`);
  const unknown = names.filter((n) => !required.includes(n));
  if (unknown.length > 0) problems.push(`unknown column(s) ${listed([...new Set(unknown)])}`);
  if (problems.length > 0) throw fail(`${problems.join('; ')} (expected ${required.join(',')}, in any order)`);

  const iv = names.indexOf('vignette');
  const it = names.indexOf('track');
  const itime = names.indexOf('t');
  const ic = channelNames.map((n) => names.indexOf(n));
  const width = names.length;

  return (line, n) => {
    const fields = line.split(',');
    const q = fields.findIndex((f) => f.includes('"'));
    if (q >= 0) return rowError(ctx, n, names[q] ?? q + 1, 'double quotes are not supported (quoted fields)');
    if (fields.length !== width) return rowError(ctx, n, undefined, `expected ${width} fields, found ${fields.length}`);
    const row = checkIds(ctx, n, fields[iv].trim(), fields[it].trim(), parseDecimal(fields[itime]));
    if (row instanceof InputError) return row;
    for (let c = 0; c < ic.length; c++) {
      const x = parseDecimal(fields[ic[c]]);
      const bad = typeof x === 'string' ? x : setValue(ctx, c, x);
      if (bad !== undefined) return rowError(ctx, n, channelNames[c], bad);
    }
    return row;
  };
}

/** The parser of NDJSON rows (no header). */
function ndjsonParser(ctx: RowContext): RowParser {
  const channelNames = ctx.plan.channels.map((c) => c.name);
  const keys = ['vignette', 'track', 't', ...channelNames];
  const known = new Set(keys);

  return (line, n) => {
    let obj: unknown;
    try {
      obj = JSON.parse(line);
    } catch (e) {
      return rowError(ctx, n, undefined, `invalid JSON: ${e instanceof Error ? e.message : String(e)}`);
    }
    if (!isRecord(obj)) return rowError(ctx, n, undefined, 'expected a JSON object');
    for (const k of Object.keys(obj)) if (!known.has(k)) return rowError(ctx, n, k, 'unknown key');
    for (const k of keys) if (!Object.hasOwn(obj, k)) return rowError(ctx, n, k, 'missing key');
    const v = obj.vignette;
    if (typeof v !== 'string') return rowError(ctx, n, 'vignette', 'vignette must be a string');
    const tr = obj.track;
    let track: string;
    if (typeof tr === 'string') track = tr;
    else if (typeof tr === 'number' && Number.isSafeInteger(tr)) track = String(tr);
    else return rowError(ctx, n, 'track', 'track must be a string or an integer');
    const row = checkIds(ctx, n, v, track, jsonNumber(obj.t));
    if (row instanceof InputError) return row;
    for (let c = 0; c < channelNames.length; c++) {
      const x = jsonNumber(obj[channelNames[c]]);
      const bad = typeof x === 'string' ? x : setValue(ctx, c, x);
      if (bad !== undefined) return rowError(ctx, n, channelNames[c], bad);
    }
    return row;
  };
}

/**
 * Sort one track's samples by time (stable: among equal times the first row read comes first), keep
 * the first sample of each time, and unwrap circular channels.
 */
function finishTrack(buf: TrackBuffer, plan: EventPlan): { track: RawTrack; duplicates: number } {
  const n = buf.n;
  const t = buf.t;
  let sorted = true;
  for (let i = 1; i < n && sorted; i++) if (t[i] < t[i - 1]) sorted = false;
  let order: Uint32Array | undefined;
  if (!sorted) {
    order = new Uint32Array(n);
    for (let i = 0; i < n; i++) order[i] = i;
    order.sort((a, b) => t[a] - t[b] || a - b);
  }
  const keep = new Uint32Array(n);
  let k = 0;
  for (let j = 0; j < n; j++) {
    const i = order === undefined ? j : order[j];
    if (k === 0 || t[i] !== t[keep[k - 1]]) keep[k++] = i;
  }
  const gather = (src: Float64Array): Float64Array => {
    const out = new Float64Array(k);
    for (let j = 0; j < k; j++) out[j] = src[keep[j]];
    return out;
  };
  const values = buf.values.map((src, c) => {
    const period = plan.channels[c].period;
    const v = gather(src);
    return period === undefined ? v : unwrapCircular(v, period);
  });
  const track: RawTrack = { vignette: plan.vignettes[buf.vignetteIndex].id, track: buf.track, t: gather(t), values };
  return { track, duplicates: n - k };
}

/**
 * The reader core over lines (without their line breaks). `fileLabel` names the input in messages
 * and, when `options.format` is absent, chooses the format by its extension.
 */
export async function readTracksFromLines(
  lines: AsyncIterable<string> | Iterable<string>,
  fileLabel: string,
  plan: EventPlan,
  options: ReadOptions = {},
): Promise<ReadResult> {
  const format = options.format ?? formatFromName(fileLabel);
  const ctx: RowContext = {
    file: fileLabel,
    plan,
    vignetteIndex: new Map(plan.vignettes.map((v, i) => [v.id, i])),
    scratch: new Float64Array(plan.channels.length),
    limits: Float64Array.from(plan.channels, (c) => (c.period === undefined ? Infinity : MAX_CIRCULAR_TURNS * c.period)),
  };
  let parse: RowParser | undefined = format === 'ndjson' ? ndjsonParser(ctx) : undefined;
  const buffers = new Map<string, TrackBuffer>();
  const errors: InputError[] = [];
  let lineNo = 0;
  let rows = 0;
  let skipped = 0;
  let beyondHorizon = 0;

  for await (const raw of lines) {
    lineNo++;
    const line = lineNo === 1 && raw.charCodeAt(0) === 0xfeff ? raw.slice(1) : raw;
    if (line.trim() === '') continue;
    if (parse === undefined) {
      parse = csvParser(ctx, line, lineNo);
      continue;
    }
    rows++;
    const row = parse(line, lineNo);
    if (row instanceof InputError) {
      if (options.skipBadRows !== true) throw row;
      skipped++;
      if (errors.length < MAX_KEPT_ERRORS) errors.push(row);
      continue;
    }
    if (row.t > plan.vignettes[row.vignetteIndex].horizon) {
      beyondHorizon++;
      continue;
    }
    const key = `${row.vignetteIndex}\u0000${row.track}`;
    let buf = buffers.get(key);
    if (buf === undefined) {
      buf = new TrackBuffer(row.vignetteIndex, row.track, plan.channels.length);
      buffers.set(key, buf);
    }
    buf.push(row.t, ctx.scratch);
  }

  if (rows === 0) throw new InputError('TRACKS_EMPTY', { file: fileLabel, reason: 'no data rows' });

  const ordered = [...buffers.values()].sort(
    (a, b) => a.vignetteIndex - b.vignetteIndex || (a.track < b.track ? -1 : a.track > b.track ? 1 : 0),
  );
  buffers.clear();
  const tracks: RawTrack[] = [];
  let duplicates = 0;
  for (let i = 0; i < ordered.length; i++) {
    const done = finishTrack(ordered[i], plan);
    tracks.push(done.track);
    duplicates += done.duplicates;
  }
  ordered.length = 0;
  if (tracks.length === 0) {
    const first = errors.length > 0 ? `; first refused row: ${errors[0].message}` : '';
    throw new InputError('TRACKS_EMPTY', {
      file: fileLabel,
      reason: `no usable data rows (${rows} rows: ${skipped} refused, ${beyondHorizon} beyond the horizon)${first}`,
    });
  }
  const accepted = rows - skipped - beyondHorizon - duplicates;
  return {
    tracks,
    report: { file: fileLabel, rows, accepted, skipped, duplicates, beyondHorizon, errors, tracks: tracks.length },
  };
}

/**
 * Read a track file (streamed line by line). A file that cannot be read is InputError
 * 'TRACKS_UNREADABLE'; see readTracksFromLines for everything else.
 */
export async function readTracks(path: string, plan: EventPlan, options: ReadFileOptions = {}): Promise<ReadResult> {
  const format = options.format ?? formatFromName(path);
  const unreadable = (e: unknown): InputError =>
    new InputError('TRACKS_UNREADABLE', {
      file: path,
      reason: `cannot read tracks: ${e instanceof Error ? e.message : String(e)}`,
    });
  let totalBytes: number;
  try {
    totalBytes = (await stat(path)).size;
  } catch (e) {
    throw unreadable(e);
  }
  const stream = createReadStream(path, { encoding: 'utf8', highWaterMark: 1 << 16 });
  const { onProgress } = options;
  if (onProgress !== undefined) stream.on('data', () => onProgress(stream.bytesRead, totalBytes));
  try {
    return await readTracksFromLines(boundedLines(stream as AsyncIterable<string>, path, MAX_LINE_CHARS, format === 'csv'), path, plan, { skipBadRows: options.skipBadRows, format });
  } catch (e) {
    throw e instanceof InputError ? e : unreadable(e);
  } finally {
    stream.destroy();
  }
}
