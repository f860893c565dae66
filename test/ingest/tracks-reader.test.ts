/**
 * Tests of ingest/tracks-reader.ts and ingest/tracks-writer.ts: exact round trips (CSV and NDJSON,
 * in memory and through files), sorting, duplicates, horizons, unwrapping, every refused value with
 * its line and column, the skip policy, header errors, and two seeded property tests.
 */
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fc, test as propTest } from '@fast-check/vitest';
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import type { RawTrack } from '../../engine/types.js';
import { unwrapCircular } from '../../engine/unwrap.js';
import { InputError, formatLocation, type InputErrorCode } from '../../ingest/errors.js';
import { parsePlan, type EventPlan } from '../../ingest/plan.js';
import {
  MAX_KEPT_ERRORS,
  readTracks,
  readTracksFromLines,
  type ReadOptions,
  type ReadResult,
} from '../../ingest/tracks-reader.js';
import { formatTracksCsv, formatTracksNdjson, writeTracksCsv, writeTracksNdjson } from '../../ingest/tracks-writer.js';

/** range (linear) and bearing (circular); vignette A lasts 100 s, B 50 s. */
const plan: EventPlan = parsePlan(
  JSON.stringify({
    name: 'test',
    channels: [
      { name: 'range', unit: 'm' },
      { name: 'bearing', unit: 'deg', period: 360 },
    ],
    vignettes: [
      { id: 'A', horizon: 100 },
      { id: 'B', horizon: 50 },
    ],
  }),
  'plan.json',
);

/** Only linear channels: values must come back exactly as written. */
const linearPlan: EventPlan = parsePlan(
  JSON.stringify({
    name: 'linear',
    channels: [
      { name: 'range', unit: 'm' },
      { name: 'depth', unit: 'm' },
    ],
    vignettes: [
      { id: 'A', horizon: 100 },
      { id: 'B', horizon: 50 },
    ],
  }),
  'plan.json',
);

const HEADER = 'vignette,track,t,range,bearing';

function track(vignette: string, id: string, t: number[], ...values: number[][]): RawTrack {
  return { vignette, track: id, t: Float64Array.from(t), values: values.map((v) => Float64Array.from(v)) };
}

/** Plain arrays, so that a failing comparison prints readably; Object.is semantics are kept by toEqual. */
function plain(tracks: readonly RawTrack[]): { vignette: string; track: string; t: number[]; values: number[][] }[] {
  return tracks.map((tr) => ({
    vignette: tr.vignette,
    track: tr.track,
    t: Array.from(tr.t),
    values: tr.values.map((v) => Array.from(v)),
  }));
}

function readCsv(text: string, options: ReadOptions = {}, p: EventPlan = plan): Promise<ReadResult> {
  return readTracksFromLines(text.split('\n'), 'live.csv', p, options);
}

function readNdjson(lines: string[], options: ReadOptions = {}, p: EventPlan = plan): Promise<ReadResult> {
  return readTracksFromLines(lines, 'live.ndjson', p, options);
}

/** Await a promise that must reject with an InputError, and return that error. */
async function rejection(p: Promise<unknown>): Promise<InputError> {
  const outcome = await p.then(
    () => undefined,
    (e: unknown) => e,
  );
  if (outcome instanceof InputError) return outcome;
  throw new Error(`expected an InputError, got ${String(outcome)}`);
}

function expectCounts(result: ReadResult): void {
  const r = result.report;
  expect(r.rows).toBe(r.accepted + r.skipped + r.beyondHorizon + r.duplicates);
  expect(r.accepted).toBe(result.tracks.reduce((n, tr) => n + tr.t.length, 0));
  expect(r.tracks).toBe(result.tracks.length);
}

const awkward = [0, -0, 1e-300, 5e-324, 0.1 + 0.2, -123456.789, 1.7976931348623157e308, 2 ** 53 + 2, 1e21, 1 / 3];

describe('errors', () => {
  test('formatLocation and the message follow `file:line: column "name": reason`', () => {
    expect(formatLocation({ file: 'live.csv', line: 17, column: 'range' })).toBe('live.csv:17: column "range"');
    expect(formatLocation({ file: 'live.csv', line: 3 })).toBe('live.csv:3');
    expect(formatLocation({ file: 'live.csv', column: 4 })).toBe('live.csv: column 4');
    expect(formatLocation({ line: 2 })).toBe('line 2');
    expect(formatLocation({})).toBe('');
    const e = new InputError('TRACKS_ROW', { file: 'live.csv', line: 17, column: 'range', reason: 'not a number ("12a.5")' });
    expect(e.message).toBe('live.csv:17: column "range": not a number ("12a.5")');
    expect(e).toBeInstanceOf(Error);
    expect(e.name).toBe('InputError');
    expect(new InputError('TRACKS_EMPTY', { reason: 'no data rows' }).message).toBe('no data rows');
  });
});

describe('round trips through the writer', () => {
  const tracks = [
    track('A', 'alpha', [0, 0.5, 1.25, 99.999999], [awkward[0], awkward[1], awkward[2], awkward[3]], [awkward[4], awkward[5], awkward[6], awkward[7]]),
    track('A', 'beta', [1e-9, 100], [awkward[8], awkward[9]], [-0, 0]),
    track('B', 'alpha', [50], [42], [-42]),
  ];

  test('CSV: values come back exactly equal (sign of zero, subnormals, extremes)', async () => {
    const text = formatTracksCsv(tracks, linearPlan.channels);
    expect(text.split('\n')[0]).toBe('vignette,track,t,range,depth');
    expect(text.split('\n')[2]).toBe('A,alpha,0.5,-0,-123456.789');
    const result = await readCsv(text, {}, linearPlan);
    expect(plain(result.tracks)).toEqual(plain(tracks));
    expect(Object.is(result.tracks[0].values[0][1], -0)).toBe(true);
    expect(result.report).toMatchObject({ rows: 7, accepted: 7, skipped: 0, duplicates: 0, beyondHorizon: 0, tracks: 3 });
  });

  test('NDJSON: values come back exactly equal', async () => {
    const text = formatTracksNdjson(tracks, linearPlan.channels);
    const result = await readNdjson(text.split('\n'), {}, linearPlan);
    expect(plain(result.tracks)).toEqual(plain(tracks));
    expect(Object.is(result.tracks[1].values[1][0], -0)).toBe(true);
  });

  test('the writer refuses what the reader could not read back', () => {
    expect(() => formatTracksCsv([track('A', 'a,b', [0], [1], [2])], linearPlan.channels)).toThrow(RangeError);
    expect(() => formatTracksCsv([track('A', ' a', [0], [1], [2])], linearPlan.channels)).toThrow(RangeError);
    expect(() => formatTracksCsv([track('A', 'a', [0], [NaN], [2])], linearPlan.channels)).toThrow(RangeError);
    expect(() => formatTracksNdjson([track('A', 'a', [0], [1], [Infinity])], linearPlan.channels)).toThrow(RangeError);
    expect(() => formatTracksNdjson([track('A', 'a', [0, 1], [1], [2, 3])], linearPlan.channels)).toThrow(RangeError);
    expect(() => formatTracksNdjson([track('A', 'a', [0], [1])], linearPlan.channels)).toThrow(RangeError);
  });
});

describe('files', () => {
  let dir = '';
  beforeAll(async () => {
    dir = await mkdtemp(join(tmpdir(), 'plumbline-tracks-'));
  });
  afterAll(async () => {
    await rm(dir, { recursive: true, force: true });
  });

  /** Long tracks (more than one write chunk, and buffers that grow several times). */
  function longTracks(): RawTrack[] {
    const out: RawTrack[] = [];
    for (const [v, horizon] of [['A', 100], ['B', 50]] as const) {
      for (let k = 0; k < 3; k++) {
        const n = 3000;
        const t = Array.from({ length: n }, (_, i) => (i * horizon) / (n - 1));
        const range = t.map((x) => 1000 + 3 * x + Math.sin(x * (k + 1)) / 7);
        const depth = t.map((x) => -x / 3);
        out.push(track(v, `run-${k}`, t, range, depth));
      }
    }
    return out;
  }

  test('writeTracksCsv then readTracks gives the same tracks, with progress up to the file size', async () => {
    const path = join(dir, 'long.csv');
    const tracks = longTracks();
    await writeTracksCsv(path, tracks, linearPlan.channels);
    const progress: [number, number][] = [];
    const result = await readTracks(path, linearPlan, { onProgress: (read, total) => progress.push([read, total]) });
    expect(plain(result.tracks)).toEqual(plain(tracks));
    expect(result.report.file).toBe(path);
    expect(result.report.rows).toBe(18000);
    expect(progress.length).toBeGreaterThan(1);
    const [lastRead, total] = progress[progress.length - 1];
    expect(lastRead).toBe(total);
    expect(total).toBeGreaterThan(1 << 16);
  });

  test('writeTracksNdjson then readTracks (.ndjson and .jsonl) gives the same tracks', async () => {
    const tracks = longTracks();
    for (const name of ['long.ndjson', 'long.jsonl']) {
      const path = join(dir, name);
      await writeTracksNdjson(path, tracks, linearPlan.channels);
      const result = await readTracks(path, linearPlan);
      expect(plain(result.tracks)).toEqual(plain(tracks));
    }
  });

  test('an explicit format overrides the extension; an unknown extension is TRACKS_FORMAT', async () => {
    const path = join(dir, 'tracks.txt');
    await writeFile(path, `${HEADER}\nA,1,0,5,10\n`);
    expect((await rejection(readTracks(path, plan))).code).toBe('TRACKS_FORMAT');
    const result = await readTracks(path, plan, { format: 'csv' });
    expect(plain(result.tracks)).toEqual([{ vignette: 'A', track: '1', t: [0], values: [[5], [10]] }]);
  });

  test('a missing file or a directory is TRACKS_UNREADABLE', async () => {
    const missing = await rejection(readTracks(join(dir, 'missing.csv'), plan));
    expect(missing.code).toBe('TRACKS_UNREADABLE');
    const directory = await rejection(readTracks(dir, plan, { format: 'csv' }));
    expect(directory.code).toBe('TRACKS_UNREADABLE');
  });

  test('a bad row in a file reports the file, line and column', async () => {
    const path = join(dir, 'bad.csv');
    await writeFile(path, `${HEADER}\r\nA,1,0,5,10\r\nA,1,1,x,10\r\n`);
    const err = await rejection(readTracks(path, plan));
    expect(err).toMatchObject({ code: 'TRACKS_ROW', file: path, line: 3, column: 'range' });
  });

  test('BOM, CRLF and blank lines in a file are tolerated', async () => {
    const path = join(dir, 'crlf.csv');
    await writeFile(path, `\uFEFF${HEADER}\r\n\r\nA,1,0,5,10\r\n   \r\nA,1,1,6,11\r\n`);
    const result = await readTracks(path, plan);
    expect(plain(result.tracks)).toEqual([{ vignette: 'A', track: '1', t: [0, 1], values: [[5, 6], [10, 11]] }]);
    expect(result.report.rows).toBe(2);
  });

  test('BOM and CRLF in an NDJSON file are tolerated', async () => {
    const path = join(dir, 'bom.ndjson');
    await writeFile(path, '\uFEFF{"vignette":"B","track":"x","t":1,"range":2,"bearing":3}\r\n\r\n');
    const result = await readTracks(path, plan);
    expect(plain(result.tracks)).toEqual([{ vignette: 'B', track: 'x', t: [1], values: [[2], [3]] }]);
  });
});

describe('ordering, duplicates, horizon, unwrapping', () => {
  test('rows out of order and interleaved are sorted per track; tracks by plan vignette order, then id', async () => {
    const text = [
      HEADER,
      'B,z,3,30,0',
      'A,b,2,2,0',
      'B,z,1,10,0',
      'A,a,9,90,0',
      'A,b,0,0,0',
      'A,a,4,40,0',
      'A,b,1,1,0',
      'B,z,2,20,0',
    ].join('\n');
    const result = await readCsv(text);
    expect(result.tracks.map((t) => `${t.vignette}/${t.track}`)).toEqual(['A/a', 'A/b', 'B/z']);
    expect(plain(result.tracks)[1]).toEqual({ vignette: 'A', track: 'b', t: [0, 1, 2], values: [[0, 1, 2], [0, 0, 0]] });
    expect(plain(result.tracks)[2].t).toEqual([1, 2, 3]);
    expect(plain(result.tracks)[2].values[0]).toEqual([10, 20, 30]);
    expect(plain(result.tracks)[0].values[0]).toEqual([40, 90]);
    expectCounts(result);
  });

  test('exact duplicate times are dropped, the first row read is kept, and they are counted', async () => {
    const text = [HEADER, 'A,1,2,200,0', 'A,1,1,100,0', 'A,1,2,999,0', 'A,1,1,888,0', 'A,1,2,777,0', 'A,2,1,1,0', 'A,1,1.5,150,0'].join('\n');
    const result = await readCsv(text);
    expect(plain(result.tracks)[0]).toEqual({ vignette: 'A', track: '1', t: [1, 1.5, 2], values: [[100, 150, 200], [0, 0, 0]] });
    expect(result.report).toMatchObject({ rows: 7, accepted: 4, duplicates: 3, skipped: 0 });
    expectCounts(result);
  });

  test('the same time in different tracks is not a duplicate', async () => {
    const result = await readCsv([HEADER, 'A,1,1,1,0', 'A,2,1,2,0', 'B,1,1,3,0'].join('\n'));
    expect(result.report.duplicates).toBe(0);
    expect(result.tracks).toHaveLength(3);
  });

  test('a bearing is unwrapped across 360 (after sorting by time)', async () => {
    const text = [HEADER, 'A,1,0,0,350', 'A,1,3,0,2', 'A,1,1,0,355', 'A,1,2,0,359.5', 'A,1,4,0,7', 'A,1,5,0,350'].join('\n');
    const result = await readCsv(text);
    expect(Array.from(result.tracks[0].values[1])).toEqual([350, 355, 359.5, 362, 367, 350]);
    // The linear channel is left alone even when it jumps by more than half a period.
    const jump = await readCsv([HEADER, 'A,1,0,350,0', 'A,1,1,2,0'].join('\n'));
    expect(Array.from(jump.tracks[0].values[0])).toEqual([350, 2]);
  });

  test('points beyond the vignette horizon are dropped and counted, not errors', async () => {
    const text = [HEADER, 'A,1,100,1,0', 'A,1,100.5,2,0', 'B,1,50,3,0', 'B,1,51,4,0', 'B,1,99,5,0', 'B,1,0,6,0'].join('\n');
    const result = await readCsv(text);
    expect(plain(result.tracks)).toEqual([
      { vignette: 'A', track: '1', t: [100], values: [[1], [0]] },
      { vignette: 'B', track: '1', t: [0, 50], values: [[6, 3], [0, 0]] },
    ]);
    expect(result.report).toMatchObject({ rows: 6, accepted: 3, beyondHorizon: 3, skipped: 0 });
    expectCounts(result);
  });

  test('header columns may come in any order', async () => {
    const result = await readCsv(['bearing,t,range,track,vignette', '10,0,5,1,A', ' 20 , 1 , 6 , 1 , A '].join('\n'));
    expect(plain(result.tracks)).toEqual([{ vignette: 'A', track: '1', t: [0, 1], values: [[5, 6], [10, 20]] }]);
  });
});

/** Build a CSV whose line `line` (1-based, header is line 1) is `bad`, preceded by good rows. */
function csvWithBadLine(bad: string, line: number): string {
  const rows = [HEADER];
  for (let i = 2; i < line; i++) rows.push(`A,1,${i},${i},0`);
  rows.push(bad);
  rows.push('A,1,999,1,0');
  return rows.join('\n');
}

describe('refused rows (CSV)', () => {
  test('the example message: live.csv:17: column "range": not a number ("12a.5")', async () => {
    const err = await rejection(readCsv(csvWithBadLine('A,1,50,12a.5,0', 17)));
    expect(err.code).toBe('TRACKS_ROW');
    expect(err.message).toBe('live.csv:17: column "range": not a number ("12a.5")');
  });

  const cases: [string, string, string, string][] = [
    // [what, row, column, reason]
    ['NaN', 'A,1,5,NaN,0', 'range', 'NaN is not allowed'],
    ['-nan', 'A,1,5,0,-nan', 'bearing', 'NaN is not allowed'],
    ['Infinity', 'A,1,5,Infinity,0', 'range', 'infinite value'],
    ['-inf', 'A,1,5,0,-inf', 'bearing', 'infinite value'],
    ['overflow', 'A,1,5,1e999,0', 'range', 'infinite value ("1e999" overflows)'],
    ['empty', 'A,1,5,,0', 'range', 'empty value'],
    ['blank', 'A,1,5,   ,0', 'range', 'empty value'],
    ['abc', 'A,1,5,abc,0', 'range', 'not a number ("abc")'],
    ['hex', 'A,1,5,0x10,0', 'range', 'not a decimal number ("0x10")'],
    ['binary', 'A,1,5,0b1,0', 'range', 'not a decimal number ("0b1")'],
    ['digit separator', 'A,1,5,1_000,0', 'range', 'not a number ("1_000")'],
    ['two dots', 'A,1,5,1.2.3,0', 'range', 'not a number ("1.2.3")'],
    ['t not a number', 'A,1,abc,1,0', 't', 'not a number ("abc")'],
    ['t empty', 'A,1,,1,0', 't', 'empty value'],
    ['t NaN', 'A,1,NaN,1,0', 't', 'NaN is not allowed'],
    ['t negative', 'A,1,-1,1,0', 't', 'negative time (-1)'],
    ['empty track', 'A, ,1,1,0', 'track', 'empty track id'],
    ['long track id', `A,${'x'.repeat(129)},1,1,0`, 'track', 'track id longer than 128 characters'],
    ['quoted field', 'A,"1",1,1,0', 'track', 'double quotes are not supported (quoted fields)'],
    ['bearing overflow', 'A,1,5,0,3.6e8001', 'bearing', 'infinite value ("3.6e8001" overflows)'],
    ['bearing beyond a million turns', 'A,1,5,0,1e300', 'bearing', 'circular value out of range (|value| > 360000000)'],
  ];

  test.each(cases)('%s is refused with line and column', async (_what, row, column, reason) => {
    const err = await rejection(readCsv(csvWithBadLine(row, 5)));
    expect(err.code).toBe('TRACKS_ROW');
    expect(err).toMatchObject({ file: 'live.csv', line: 5, column, reason });
  });

  test('a 128-character track id and a huge range are accepted', async () => {
    const id = 'x'.repeat(128);
    const result = await readCsv([HEADER, `A,${id},1,1e300,359`].join('\n'));
    expect(result.tracks[0].track).toBe(id);
    expect(result.tracks[0].values[0][0]).toBe(1e300);
  });

  test('the wrong number of fields is a row error without a column', async () => {
    const fewer = await rejection(readCsv(csvWithBadLine('A,1,5,0', 4)));
    expect(fewer).toMatchObject({ code: 'TRACKS_ROW', line: 4, column: undefined, reason: 'expected 5 fields, found 4' });
    const more = await rejection(readCsv(csvWithBadLine('A,1,5,0,0,0', 3)));
    expect(more).toMatchObject({ code: 'TRACKS_ROW', line: 3, reason: 'expected 5 fields, found 6' });
  });

  test('an unknown vignette is TRACKS_VIGNETTE_UNKNOWN on the vignette column', async () => {
    const err = await rejection(readCsv(csvWithBadLine('C,1,5,0,0', 6)));
    expect(err).toMatchObject({ code: 'TRACKS_VIGNETTE_UNKNOWN', line: 6, column: 'vignette' });
    expect(err.message).toBe('live.csv:6: column "vignette": unknown vignette "C" (not in the plan)');
    // Vignette ids are case-sensitive.
    expect((await rejection(readCsv(csvWithBadLine('a,1,5,0,0', 2)))).code).toBe('TRACKS_VIGNETTE_UNKNOWN');
  });

  test('blank lines count for line numbers but are not rows', async () => {
    const err = await rejection(readCsv([HEADER, '', 'A,1,0,0,0', '  ', 'A,1,1,x,0'].join('\n')));
    expect(err).toMatchObject({ code: 'TRACKS_ROW', line: 5, column: 'range' });
  });
});

describe('refused rows (NDJSON)', () => {
  const good = '{"vignette":"A","track":"1","t":0,"range":1,"bearing":2}';
  const cases: [string, string, string | undefined, string][] = [
    ['string value', '{"vignette":"A","track":"1","t":1,"range":"abc","bearing":2}', 'range', 'not a number ("abc")'],
    ['quoted number', '{"vignette":"A","track":"1","t":1,"range":"12","bearing":2}', 'range', 'numbers must not be quoted ("12")'],
    ['"NaN"', '{"vignette":"A","track":"1","t":1,"range":"NaN","bearing":2}', 'range', 'NaN is not allowed'],
    ['"Infinity"', '{"vignette":"A","track":"1","t":1,"range":1,"bearing":"Infinity"}', 'bearing', 'infinite value'],
    ['1e999', '{"vignette":"A","track":"1","t":1,"range":1e999,"bearing":2}', 'range', 'infinite value'],
    ['null', '{"vignette":"A","track":"1","t":1,"range":null,"bearing":2}', 'range', 'null is not a number (NaN and Infinity are not allowed)'],
    ['boolean', '{"vignette":"A","track":"1","t":1,"range":true,"bearing":2}', 'range', 'not a number (boolean)'],
    ['t as a string', '{"vignette":"A","track":"1","t":"x","range":1,"bearing":2}', 't', 'not a number ("x")'],
    ['t negative', '{"vignette":"A","track":"1","t":-0.5,"range":1,"bearing":2}', 't', 'negative time (-0.5)'],
    ['unknown key', '{"vignette":"A","track":"1","t":1,"range":1,"bearing":2,"speed":3}', 'speed', 'unknown key'],
    ['__proto__ key', '{"vignette":"A","track":"1","t":1,"range":1,"bearing":2,"__proto__":3}', '__proto__', 'unknown key'],
    ['missing key', '{"vignette":"A","track":"1","t":1,"range":1}', 'bearing', 'missing key'],
    ['track as an object', '{"vignette":"A","track":{},"t":1,"range":1,"bearing":2}', 'track', 'track must be a string or an integer'],
    ['track as a fraction', '{"vignette":"A","track":1.5,"t":1,"range":1,"bearing":2}', 'track', 'track must be a string or an integer'],
    ['empty track', '{"vignette":"A","track":"","t":1,"range":1,"bearing":2}', 'track', 'empty track id'],
    ['vignette as a number', '{"vignette":1,"track":"1","t":1,"range":1,"bearing":2}', 'vignette', 'vignette must be a string'],
    ['an array', '[1,2,3]', undefined, 'expected a JSON object'],
    ['a number', '42', undefined, 'expected a JSON object'],
  ];

  test.each(cases)('%s is refused with line and column', async (_what, row, column, reason) => {
    const err = await rejection(readNdjson([good, '', row]));
    expect(err.code).toBe('TRACKS_ROW');
    expect(err).toMatchObject({ file: 'live.ndjson', line: 3, column, reason });
  });

  test('malformed JSON is a row error', async () => {
    const err = await rejection(readNdjson([good, '{"vignette":"A",']));
    expect(err.code).toBe('TRACKS_ROW');
    expect(err.line).toBe(2);
    expect(err.reason.startsWith('invalid JSON: ')).toBe(true);
  });

  test('an unknown vignette is TRACKS_VIGNETTE_UNKNOWN', async () => {
    const err = await rejection(readNdjson(['{"vignette":"Z","track":"1","t":1,"range":1,"bearing":2}']));
    expect(err).toMatchObject({ code: 'TRACKS_VIGNETTE_UNKNOWN', line: 1, column: 'vignette' });
  });

  test('integer track ids are read as text; key order does not matter', async () => {
    const result = await readNdjson(['{"bearing":2,"range":1,"t":0,"track":7,"vignette":"B"}']);
    expect(plain(result.tracks)).toEqual([{ vignette: 'B', track: '7', t: [0], values: [[1], [2]] }]);
  });
});

describe('skipBadRows', () => {
  test('bad rows are skipped and counted; good rows are kept', async () => {
    const text = [HEADER, 'A,1,0,1,0', 'A,1,1,NaN,0', 'C,1,1,1,0', 'A,1,2,3,0', 'A,1,3', 'A,1,2,9,0', 'A,1,200,1,0'].join('\n');
    const result = await readCsv(text, { skipBadRows: true });
    expect(plain(result.tracks)).toEqual([{ vignette: 'A', track: '1', t: [0, 2], values: [[1, 3], [0, 0]] }]);
    expect(result.report).toMatchObject({ rows: 7, accepted: 2, skipped: 3, duplicates: 1, beyondHorizon: 1, tracks: 1 });
    expect(result.report.errors.map((e) => [e.code, e.line, e.column])).toEqual([
      ['TRACKS_ROW', 3, 'range'],
      ['TRACKS_VIGNETTE_UNKNOWN', 4, 'vignette'],
      ['TRACKS_ROW', 6, undefined],
    ]);
    expectCounts(result);
  });

  test(`all bad rows are counted but only the first ${MAX_KEPT_ERRORS} are kept`, async () => {
    const rows = [HEADER, 'A,1,0,1,0'];
    for (let i = 0; i < 25; i++) rows.push(`A,1,${i + 1},bad${i},0`);
    const result = await readCsv(rows.join('\n'), { skipBadRows: true });
    expect(result.report.skipped).toBe(25);
    expect(result.report.errors).toHaveLength(MAX_KEPT_ERRORS);
    expect(result.report.errors[0].line).toBe(3);
    expect(result.report.errors[MAX_KEPT_ERRORS - 1].line).toBe(3 + MAX_KEPT_ERRORS - 1);
  });

  test('without the option the first bad row throws, even when later rows are bad too', async () => {
    const err = await rejection(readCsv([HEADER, 'A,1,0,1,0', 'A,1,1,x,0', 'C,1,2,1,0'].join('\n')));
    expect(err).toMatchObject({ code: 'TRACKS_ROW', line: 3 });
  });

  test('when every row is refused the result is TRACKS_EMPTY', async () => {
    const err = await rejection(readCsv([HEADER, 'A,1,0,x,0', 'A,1,1,y,0'].join('\n'), { skipBadRows: true }));
    expect(err.code).toBe('TRACKS_EMPTY');
    expect(err.reason).toContain('2 refused');
  });
});

describe('header and empty files', () => {
  const headerCases: [string, string, string[]][] = [
    ['missing channel', 'vignette,track,t,range', ['missing column(s) "bearing"']],
    ['unknown column', 'vignette,track,t,range,bearing,speed', ['unknown column(s) "speed"']],
    ['missing t, unknown time', 'vignette,track,time,range,bearing', ['missing column(s) "t"', 'unknown column(s) "time"']],
    ['duplicate column', 'vignette,track,t,range,bearing,range', ['duplicate column(s) "range"']],
    ['trailing comma', 'vignette,track,t,range,bearing,', ['unknown column(s) ""']],
    ['quoted header', '"vignette",track,t,range,bearing', ['double quotes are not supported in the header']],
    ['case matters', 'Vignette,track,t,range,bearing', ['missing column(s) "vignette"', 'unknown column(s) "Vignette"']],
  ];

  test.each(headerCases)('%s is TRACKS_HEADER naming the columns', async (_what, header, parts) => {
    for (const skipBadRows of [false, true]) {
      const err = await rejection(readCsv(`${header}\nA,1,0,0,0`, { skipBadRows }));
      expect(err).toMatchObject({ code: 'TRACKS_HEADER', line: 1 });
      for (const part of parts) expect(err.reason).toContain(part);
    }
  });

  test('the header is the first non-blank line', async () => {
    const err = await rejection(readCsv('\n\nvignette,track,t\nA,1,0'));
    expect(err).toMatchObject({ code: 'TRACKS_HEADER', line: 3 });
  });

  const empties: [string, string][] = [
    ['an empty file', ''],
    ['only blank lines', '\n  \n\r\n'],
    ['only a BOM', '\uFEFF'],
    ['a header only', `${HEADER}\n`],
  ];
  test.each(empties)('%s is TRACKS_EMPTY', async (_what, text) => {
    expect((await rejection(readCsv(text))).code).toBe('TRACKS_EMPTY');
    expect((await rejection(readNdjson(text.split('\n').filter((l) => !l.startsWith('vignette'))))).code).toBe('TRACKS_EMPTY');
  });

  test('a file whose rows are all beyond the horizon is TRACKS_EMPTY', async () => {
    const err = await rejection(readCsv([HEADER, 'B,1,60,0,0'].join('\n')));
    expect(err.code).toBe('TRACKS_EMPTY');
    expect(err.reason).toContain('1 beyond the horizon');
  });
});

describe('properties', () => {
  const CODES: InputErrorCode[] = ['TRACKS_HEADER', 'TRACKS_ROW', 'TRACKS_VIGNETTE_UNKNOWN', 'TRACKS_EMPTY'];

  const token = fc.oneof(
    fc.constantFrom('A', 'B', 'Z', '', ' ', 'NaN', '-Infinity', '1e999', '0x1f', '"', '-1', '1.5', '0', '359', '1e300'),
    fc.constantFrom('vignette', 'track', 't', 'range', 'bearing', '{', '}', 'null', '\uFEFF', '\r'),
    fc.string({ maxLength: 8 }),
    fc.double().map(String),
  );
  const csvLine = fc.array(token, { maxLength: 7 }).map((a) => a.join(','));
  const jsonLine = fc.oneof(
    fc.json({ maxDepth: 2 }),
    fc
      .record(
        {
          vignette: token,
          track: fc.oneof(token, fc.integer()),
          t: fc.oneof(fc.double(), token),
          range: fc.oneof(fc.double(), token),
          bearing: fc.double(),
          extra: fc.double(),
        },
        { requiredKeys: [] },
      )
      .map((o) => JSON.stringify(o)),
  );
  const header = fc.constantFrom(HEADER, 'track,vignette,t,bearing,range', 'vignette,track,t,range', '');
  const input = fc.tuple(header, fc.array(fc.oneof(csvLine, jsonLine, fc.string({ maxLength: 30 })), { maxLength: 25 }));

  propTest.prop([input], { seed: 42, numRuns: 100 })(
    'arbitrary lines never throw anything but an InputError, and what is returned is well formed',
    async ([head, body]) => {
      for (const format of ['csv', 'ndjson'] as const) {
        for (const skipBadRows of [false, true]) {
          const lines = format === 'csv' ? [head, ...body] : body;
          let result: ReadResult | undefined;
          try {
            result = await readTracksFromLines(lines, 'fuzz', plan, { format, skipBadRows });
          } catch (e) {
            if (!(e instanceof InputError)) throw e;
            expect(CODES).toContain(e.code);
          }
          if (result === undefined) continue;
          expectCounts(result);
          for (const tr of result.tracks) {
            const horizon = plan.vignettes.find((v) => v.id === tr.vignette)?.horizon ?? -1;
            for (let i = 0; i < tr.t.length; i++) {
              expect(tr.t[i] >= 0 && tr.t[i] <= horizon).toBe(true);
              if (i > 0) expect(tr.t[i]).toBeGreaterThan(tr.t[i - 1]);
              for (const v of tr.values) expect(Number.isFinite(v[i])).toBe(true);
            }
          }
        }
      }
    },
  );

  /** Samples as [t, range, bearing] with distinct times, in arbitrary order. */
  const samples = fc.uniqueArray(
    fc.tuple(
      fc.double({ min: 0, max: 50, noNaN: true }),
      fc.double({ noNaN: true, noDefaultInfinity: true }),
      fc.double({ min: 0, max: 360, maxExcluded: true, noNaN: true }),
    ),
    { minLength: 1, maxLength: 30, selector: (s) => s[0], comparator: 'SameValueZero' },
  );
  const trackSpec = fc.record({
    vignette: fc.constantFrom('A', 'B'),
    track: fc.stringMatching(/^[A-Za-z0-9_.-]{1,12}$/),
    samples,
  });
  const trackSpecs = fc.uniqueArray(trackSpec, {
    minLength: 1,
    maxLength: 6,
    selector: (s) => `${s.vignette}/${s.track}`,
  });

  propTest.prop([trackSpecs], { seed: 42, numRuns: 100 })(
    'valid generated tracks round-trip through CSV and NDJSON (sorted, bearings unwrapped)',
    async (specs) => {
      const written = specs.map((s) =>
        track(s.vignette, s.track, s.samples.map((x) => x[0]), s.samples.map((x) => x[1]), s.samples.map((x) => x[2])),
      );
      const expected = specs
        .map((s) => {
          const sorted = [...s.samples].sort((a, b) => a[0] - b[0]);
          const bearing = unwrapCircular(Float64Array.from(sorted, (x) => x[2]), 360);
          return track(s.vignette, s.track, sorted.map((x) => x[0]), sorted.map((x) => x[1]), Array.from(bearing));
        })
        .sort((a, b) => a.vignette.localeCompare(b.vignette) || (a.track < b.track ? -1 : a.track > b.track ? 1 : 0));
      const total = specs.reduce((n, s) => n + s.samples.length, 0);

      const csv = await readCsv(formatTracksCsv(written, plan.channels));
      expect(plain(csv.tracks)).toEqual(plain(expected));
      expect(csv.report).toMatchObject({ rows: total, accepted: total, skipped: 0, duplicates: 0, beyondHorizon: 0 });

      const ndjson = await readNdjson(formatTracksNdjson(written, plan.channels).split('\n'));
      expect(plain(ndjson.tracks)).toEqual(plain(expected));
    },
  );
});
