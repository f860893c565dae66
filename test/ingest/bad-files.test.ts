/**
 * Malformed and hostile input in files: track files (CSV, NDJSON) and plans, each refused with its
 * stable InputError code (ingest/errors.ts) and a location, never a crash or an unbounded read;
 * then property-based fuzzing (fast-check) of the line splitter and of the plan parser.
 */
import { mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import { createWriteStream } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fc, test as propTest } from '@fast-check/vitest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { InputError, type InputErrorCode } from '../../ingest/errors.js';
import { loadPlan, MAX_PLAN_BYTES, parsePlan, type EventPlan } from '../../ingest/plan.js';
import { boundedLines, MAX_LINE_CHARS, readTracks } from '../../ingest/tracks-reader.js';

const plan: EventPlan = parsePlan(
  JSON.stringify({
    name: 'test',
    channels: [
      { name: 'range', unit: 'm' },
      { name: 'bearing', unit: 'deg', period: 360 },
    ],
    vignettes: [{ id: 'A', horizon: 100 }],
  }),
  'plan.json',
);
const HEADER = 'vignette,track,t,range,bearing';

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'plumbline-badfiles-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function refusal(p: Promise<unknown>): Promise<InputError> {
  try {
    await p;
  } catch (e) {
    if (e instanceof InputError) return e;
    throw e;
  }
  throw new Error('expected an InputError, but the input was accepted');
}

/** Write `name` with text or with a writer of chunks (for files too large to build in memory). */
async function file(name: string, body: string | ((w: (s: string) => boolean) => void)): Promise<string> {
  const path = join(dir, name);
  if (typeof body === 'string') {
    await writeFile(path, body);
  } else {
    const out = createWriteStream(path);
    body((s) => out.write(s));
    await new Promise<void>((r, j) => out.end((e?: Error | null) => (e ? j(e) : r())));
  }
  return path;
}

interface FileCase {
  readonly name: string;
  readonly file: string;
  readonly body: string | ((w: (s: string) => boolean) => void);
  readonly code: InputErrorCode;
  /** Line the error names (when it names one). */
  readonly line?: number;
}

const goodRows = ['A,r1,0,2500,120', 'A,r1,1,2490,121'];
const TRACK_CASES: FileCase[] = [
  { name: 'one endless line (3 MiB, no line break)', file: 'endless.csv', body: (w) => { w(`${HEADER}\n`); for (let i = 0; i < 48; i++) w('9'.repeat(65536)); }, code: 'TRACKS_ROW', line: 2 },
  { name: 'a header of a million columns', file: 'wide.csv', body: (w) => { let row = 'vignette,track,t,range,bearing'; for (let i = 0; i < 1_000_000; i++) { row += `,c${i}`; if (row.length > 65536) { w(row); row = ''; } } w(`${row}\n`); }, code: 'TRACKS_HEADER', line: 1 },
  { name: 'a header of 20,000 unknown columns (listed, then counted)', file: 'wide2.csv', body: `${HEADER}${Array.from({ length: 20000 }, (_, i) => `,x${i}`).join('')}\n`, code: 'TRACKS_HEADER', line: 1 },
  { name: 'a row of a million fields', file: 'wide-row.csv', body: (w) => { w(`${HEADER}\n`); w('A,r1,0,1,2'); for (let i = 0; i < 1_000_000; i += 50_000) w(',0'.repeat(50_000)); w('\n'); }, code: 'TRACKS_ROW', line: 2 },
  { name: 'a row with too many fields', file: 'extra.csv', body: `${HEADER}\nA,r1,0,1,2,3\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'a row with too few fields', file: 'short.csv', body: `${HEADER}\nA,r1,0,1\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'NaN value', file: 'nan.csv', body: `${HEADER}\nA,r1,0,NaN,2\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'Infinity value', file: 'inf.csv', body: `${HEADER}\nA,r1,0,Infinity,2\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'overflowing number 1e999', file: 'huge.csv', body: `${HEADER}\nA,r1,0,1e999,2\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'hexadecimal number', file: 'hex.csv', body: `${HEADER}\nA,r1,0,0x10,2\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'circular value beyond a million turns', file: 'turns.csv', body: `${HEADER}\nA,r1,0,1,1e12\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'quoted fields', file: 'quoted.csv', body: `${HEADER}\n"A","r1",0,1,2\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'negative time', file: 'neg.csv', body: `${HEADER}\nA,r1,-1,1,2\n`, code: 'TRACKS_ROW', line: 2 },
  { name: 'unknown vignette', file: 'unknown.csv', body: `${HEADER}\n${goodRows[0]}\nZ,r1,0,1,2\n`, code: 'TRACKS_VIGNETTE_UNKNOWN', line: 3 },
  { name: 'binary garbage', file: 'binary.csv', body: String.fromCharCode(...Array.from({ length: 4096 }, (_, i) => (i * 7919) % 256)), code: 'TRACKS_HEADER', line: 1 },
  { name: 'empty file', file: 'empty.csv', body: '', code: 'TRACKS_EMPTY' },
  { name: 'header only', file: 'header.csv', body: `${HEADER}\n`, code: 'TRACKS_EMPTY' },
  { name: 'NDJSON: broken JSON', file: 'broken.ndjson', body: '{"vignette":"A","track":"r1","t":0,"range":1,"bearing":2}\n{"vignette":"A",\n', code: 'TRACKS_ROW', line: 2 },
  { name: 'NDJSON: nested 50,000 deep', file: 'deep.ndjson', body: `${'['.repeat(50000)}${']'.repeat(50000)}\n`, code: 'TRACKS_ROW', line: 1 },
  { name: 'NDJSON: __proto__ key', file: 'proto.ndjson', body: '{"vignette":"A","track":"r1","t":0,"range":1,"bearing":2,"__proto__":{"x":1}}\n', code: 'TRACKS_ROW', line: 1 },
  { name: 'NDJSON: number as a string', file: 'string.ndjson', body: '{"vignette":"A","track":"r1","t":"0","range":1,"bearing":2}\n', code: 'TRACKS_ROW', line: 1 },
  { name: 'NDJSON: null value', file: 'null.ndjson', body: '{"vignette":"A","track":"r1","t":0,"range":null,"bearing":2}\n', code: 'TRACKS_ROW', line: 1 },
  { name: 'NDJSON: an endless line', file: 'endless.ndjson', body: (w) => { w('{"vignette":"'); for (let i = 0; i < 20; i++) w('A'.repeat(65536)); }, code: 'TRACKS_ROW', line: 1 },
  { name: 'unknown extension', file: 'tracks.csv.exe', body: `${HEADER}\n`, code: 'TRACKS_FORMAT' },
];

describe('a corpus of bad track files', () => {
  it.each(TRACK_CASES.map((c) => [c.name, c] as const))('%s', async (_n, c) => {
    const path = await file(c.file, c.body);
    const before = process.memoryUsage().rss;
    const e = await refusal(readTracks(path, plan));
    expect(e.code).toBe(c.code);
    if (c.line !== undefined) expect(e.line).toBe(c.line);
    expect(e.message.length).toBeLessThan(2000);
    expect(e.message).toContain(c.file);
    // A refused file is not held in memory (a generous bound: the file is up to 7 MB).
    expect(process.memoryUsage().rss - before).toBeLessThan(200 * 1024 * 1024);
  });

  it('path tricks in file names are plain unreadable files', async () => {
    await mkdir(join(dir, 'a-folder.csv'), { recursive: true });
    const names = [join(dir, 'a-folder.csv'), join(dir, 'missing.csv'), join(dir, '..', 'nowhere', '..', 'x.csv'), `${join(dir, 'nul')}\u0000.csv`];
    for (const n of names) {
      const e = await refusal(readTracks(n, plan));
      expect(e.code, n).toBe('TRACKS_UNREADABLE');
    }
  });

  it('a good file next to the bad ones reads', async () => {
    const path = await file('good.csv', `${HEADER}\n${goodRows.join('\n')}\n`);
    const r = await readTracks(path, plan);
    expect(r.report.accepted).toBe(2);
  });
});

describe('a corpus of bad plans', () => {
  const cases: Array<[string, string, string, InputErrorCode]> = [
    ['broken JSON', 'plan.json', '{"name": "x", ', 'PLAN_SYNTAX'],
    ['JSON nested 100,000 deep', 'deep.json', `${'['.repeat(100000)}${']'.repeat(100000)}`, 'PLAN_INVALID'],
    ['broken YAML', 'plan.yaml', 'name: [x\n  - : :', 'PLAN_SYNTAX'],
    ['YAML alias expansion bomb', 'bomb.yaml', `a: &a ["x","x","x","x","x","x","x","x","x"]\nb: &b [*a,*a,*a,*a,*a,*a,*a,*a,*a]\nc: &c [*b,*b,*b,*b,*b,*b,*b,*b,*b]\nd: &d [*c,*c,*c,*c,*c,*c,*c,*c,*c]\ne: &e [*d,*d,*d,*d,*d,*d,*d,*d,*d]\nf: [*e,*e,*e,*e,*e,*e,*e,*e,*e]\n`, 'PLAN_SYNTAX'],
    ['wrong types', 'types.json', JSON.stringify({ name: 3, channels: 'range', vignettes: {} }), 'PLAN_INVALID'],
    ['NaN horizon (YAML .nan)', 'nan.yaml', 'name: x\nchannels: [{name: range, unit: m}]\nvignettes: [{id: A, horizon: .nan}]\n', 'PLAN_INVALID'],
    ['infinite horizon (YAML .inf)', 'inf.yaml', 'name: x\nchannels: [{name: range, unit: m}]\nvignettes: [{id: A, horizon: .inf}]\n', 'PLAN_INVALID'],
  ];
  it.each(cases)('%s', async (_n, name, text, code) => {
    const e = await refusal(Promise.resolve().then(() => parsePlan(text, name)));
    expect(e.code).toBe(code);
    expect(e.message.length).toBeLessThan(5000);
  });

  it('a plan file larger than the limit is refused before it is read', async () => {
    const path = await file('big.json', (w) => { for (let i = 0; i <= MAX_PLAN_BYTES / 65536; i++) w(' '.repeat(65536)); });
    expect((await refusal(loadPlan(path))).code).toBe('PLAN_UNREADABLE');
  });
});

describe('properties (fast-check)', () => {
  async function collect(chunks: string[], max: number): Promise<string[] | InputError> {
    async function* gen() { yield* chunks; }
    const out: string[] = [];
    try {
      for await (const l of boundedLines(gen(), 'f', max)) out.push(l);
    } catch (e) {
      if (e instanceof InputError) return e;
      throw e;
    }
    return out;
  }
  const text = fc.array(fc.oneof(fc.string({ maxLength: 12 }), fc.constantFrom('\n', '\r\n', '\r', '')), { maxLength: 30 }).map((a) => a.join(''));

  propTest.prop([text, fc.integer({ min: 1, max: 8 })], { seed: 21, numRuns: 400 })('the line splitter gives the lines of the text however it is chunked', async (t, pieces) => {
    const size = Math.max(1, Math.ceil(t.length / pieces));
    const chunks = Array.from({ length: Math.ceil(t.length / size) }, (_, i) => t.slice(i * size, (i + 1) * size));
    const got = await collect(chunks, MAX_LINE_CHARS);
    // Reference: split on LF, drop one CR before each LF and at the end, drop an empty last piece.
    const want = t.split('\n').map((l) => (l.endsWith('\r') ? l.slice(0, -1) : l));
    if (t.endsWith('\n') || t === '') want.pop();
    expect(got).toEqual(want);
  });

  propTest.prop([text, fc.integer({ min: 1, max: 10 })], { seed: 22, numRuns: 400 })('a line longer than the limit is refused with its line number; shorter ones pass', async (t, max) => {
    const got = await collect([t], max);
    const lines = t.split('\n');
    const firstLong = lines.findIndex((l) => l.length > max);
    if (firstLong < 0) expect(Array.isArray(got)).toBe(true);
    else {
      expect(got).toBeInstanceOf(InputError);
      expect((got as InputError).line).toBe(firstLong + 1);
    }
  });

  const planCodes = new Set(['PLAN_SYNTAX', 'PLAN_INVALID']);
  const planDoc = fc.oneof(
    fc.json({ maxDepth: 4 }),
    fc.string({ maxLength: 200 }),
    fc.record({
      name: fc.oneof(fc.string(), fc.integer()),
      channels: fc.array(fc.record({ name: fc.oneof(fc.constantFrom('range', 'bearing', 't', 'vignette', ''), fc.string()), unit: fc.string(), period: fc.oneof(fc.double(), fc.constant(360)), tolerance: fc.double() }, { requiredKeys: ['name'] }), { maxLength: 3 }),
      vignettes: fc.array(fc.record({ id: fc.string({ maxLength: 5 }), horizon: fc.oneof(fc.double(), fc.integer()) }), { maxLength: 3 }),
      analysis: fc.dictionary(fc.constantFrom('alpha', 'gridSize', 'segments', 'combination', 'components'), fc.oneof(fc.double(), fc.string(), fc.integer())),
    }, { requiredKeys: [] }).map((o) => JSON.stringify(o)),
  );
  propTest.prop([planDoc, fc.constantFrom('p.json', 'p.yaml')], { seed: 23, numRuns: 400 })('the plan parser returns a plan or a stable code, never anything else', (doc, name) => {
    let plan: EventPlan | undefined;
    try {
      plan = parsePlan(doc, name);
    } catch (e) {
      if (!(e instanceof InputError)) throw e;
      expect(planCodes.has(e.code)).toBe(true);
      return;
    }
    // What is accepted is well formed: finite positive horizons, distinct vignette ids.
    for (const v of plan.vignettes) expect(Number.isFinite(v.horizon) && v.horizon > 0).toBe(true);
    expect(new Set(plan.vignettes.map((v) => v.id)).size).toBe(plan.vignettes.length);
  });
});
