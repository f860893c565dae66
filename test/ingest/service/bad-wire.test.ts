/**
 * Malformed and hostile input over the wire: a corpus of distinct cases, each answered with its
 * stable code (ingest/service/protocol.ts ERROR_CODES) or its WebSocket close code (RFC 6455
 * section 7.4.1: 1007 invalid frame payload data, 1008 policy violation, 1009 message too big),
 * with the service alive after each and nothing already acknowledged lost; then property-based
 * fuzzing (fast-check) of the message parser and of a live connection.
 */
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { connect } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fc, test as propTest } from '@fast-check/vitest';
import WebSocket from 'ws';
import { feedClient, type FeedClient, type Reply } from '../../support/feed-client.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../../ingest/plan.js';
import { ERROR_CODES, parseClientMessage, type ErrorCode } from '../../../ingest/service/protocol.js';
import { startServer, type RunningServer } from '../../../ingest/service/server.js';

type Client = FeedClient;
const client = feedClient;

const dir = mkdtempSync(join(tmpdir(), 'plumbline-badwire-'));
let plan: EventPlan;
let server: RunningServer;
let planPath: string;
const logLines: string[] = [];
const V = 'S1-L1';
const CH = ['range', 'bearing'];

beforeAll(async () => {
  const files = await writeDemoFiles(join(dir, 'demo'), { seed: 5, simsPerVignette: 12 });
  planPath = files.plan;
  plan = await loadPlan(files.plan);
  server = await startServer({ planPath, journalPath: join(dir, 'wire.sqlite'), port: 0, inProcessCompute: true, log: (l) => logLines.push(l) });
});
afterAll(async () => {
  await server?.close();
  rmSync(dir, { recursive: true, force: true });
});

const feed = (s: RunningServer) => `${s.url.replace('http', 'ws')}/feed`;
const msg = (o: Record<string, unknown>) => JSON.stringify({ v: 1, ...o });
const pt = (seq: number, t: number, range = 2500 - seq, bearing = 120) => ({ seq, t, values: [range, bearing] });

/** One case: frames to send after the setup, and the code of the reply to the frame with id `id`. */
interface WireCase {
  readonly name: string;
  /** Frames sent first (their replies are not checked), e.g. opening a track. */
  readonly setup?: (track: string) => string[];
  readonly frame: (track: string) => string | Buffer;
  readonly code: ErrorCode;
}

const deepArray = '['.repeat(20_000) + ']'.repeat(20_000);
const deepObject = `{"v":1,"type":"note","id":"x","text":${'{"a":'.repeat(5000)}1${'}'.repeat(5000)}}`;
const open = (track: string, extra: Record<string, unknown> = {}) => msg({ type: 'open', id: `open-${track}`, vignette: V, track, source: 'live', channels: CH, ...extra });
const opened = (track: string) => [open(track)];
const points = (track: string, pts: unknown[], id = 'x') => msg({ type: 'points', id, vignette: V, track, points: pts });

const CASES: WireCase[] = [
  // Broken JSON
  { name: 'not JSON at all', frame: () => 'hello, server', code: 'BAD_JSON' },
  { name: 'truncated JSON', frame: () => '{"v":1,"type":"open","id":"x"', code: 'BAD_JSON' },
  { name: 'NaN literal (not JSON)', frame: () => '{"v":1,"type":"ping","id":NaN}', code: 'BAD_JSON' },
  { name: 'Infinity literal (not JSON)', frame: () => '{"v":1,"type":"ping","id":Infinity}', code: 'BAD_JSON' },
  { name: 'trailing garbage', frame: () => '{"v":1,"type":"ping","id":"x"} extra', code: 'BAD_JSON' },
  { name: 'empty frame', frame: () => '', code: 'BAD_JSON' },
  { name: 'array nested 20,000 deep', frame: () => deepArray, code: 'BAD_MESSAGE' },
  { name: 'object nested 5,000 deep in a field', frame: () => deepObject, code: 'BAD_MESSAGE' },
  // Wrong shapes and types
  { name: 'JSON null', frame: () => 'null', code: 'BAD_MESSAGE' },
  { name: 'JSON number', frame: () => '42', code: 'BAD_MESSAGE' },
  { name: 'JSON string', frame: () => '"open"', code: 'BAD_MESSAGE' },
  { name: 'unknown message type', frame: () => msg({ type: 'launch', id: 'x' }), code: 'BAD_MESSAGE' },
  { name: 'no version', frame: () => JSON.stringify({ type: 'ping', id: 'x' }), code: 'BAD_MESSAGE' },
  { name: 'version 2', frame: () => JSON.stringify({ v: 2, type: 'ping', id: 'x' }), code: 'UNSUPPORTED_VERSION' },
  { name: 'version as a string', frame: () => JSON.stringify({ v: '1', type: 'ping', id: 'x' }), code: 'UNSUPPORTED_VERSION' },
  { name: 'empty id', frame: () => msg({ type: 'ping', id: '' }), code: 'BAD_MESSAGE' },
  { name: 'id of 300 characters', frame: () => msg({ type: 'ping', id: 'i'.repeat(300) }), code: 'BAD_MESSAGE' },
  { name: 'numeric id', frame: () => msg({ type: 'ping', id: 7 }), code: 'BAD_MESSAGE' },
  { name: 'unknown key', frame: () => msg({ type: 'ping', id: 'x', admin: true }), code: 'BAD_MESSAGE' },
  { name: '__proto__ key', frame: () => '{"v":1,"type":"ping","id":"x","__proto__":{"polluted":true}}', code: 'BAD_MESSAGE' },
  { name: 'track id with a lone surrogate', frame: (tr) => open(`${tr}\ud800`), code: 'BAD_MESSAGE' },
  { name: 'track id with a NUL character', frame: (tr) => open(`${tr}\u0000x`), code: 'BAD_MESSAGE' },
  { name: 'unknown source', frame: (tr) => open(tr, { source: 'guess' }), code: 'BAD_MESSAGE' },
  { name: 'channels not an array', setup: opened, frame: (tr) => open(`${tr}b`, { channels: 'range,bearing' }), code: 'BAD_MESSAGE' },
  // Numbers
  { name: 'seq as a string', setup: opened, frame: (tr) => points(tr, [{ seq: '1', t: 0, values: [1, 2] }]), code: 'BAD_MESSAGE' },
  { name: 'seq 0', setup: opened, frame: (tr) => points(tr, [pt(0, 0)]), code: 'BAD_MESSAGE' },
  { name: 'fractional seq', setup: opened, frame: (tr) => points(tr, [pt(1.5, 0)]), code: 'BAD_MESSAGE' },
  { name: 'seq 1e300 (beyond safe integers)', setup: opened, frame: (tr) => points(tr, [pt(1e300, 0)]), code: 'BAD_MESSAGE' },
  { name: 'negative time', setup: opened, frame: (tr) => points(tr, [pt(1, -1)]), code: 'BAD_MESSAGE' },
  { name: 'time 1e300', setup: opened, frame: (tr) => points(tr, [pt(1, 1e300)]), code: 'BEYOND_HORIZON' },
  { name: 'value 1e400 (overflows to infinity)', setup: opened, frame: (tr) => `{"v":1,"type":"points","id":"x","vignette":"${V}","track":"${tr}","points":[{"seq":1,"t":0,"values":[1e400,1]}]}`, code: 'BAD_MESSAGE' },
  { name: 'value null', setup: opened, frame: (tr) => points(tr, [{ seq: 1, t: 0, values: [null, 1] }]), code: 'BAD_MESSAGE' },
  { name: 'value as a string', setup: opened, frame: (tr) => points(tr, [{ seq: 1, t: 0, values: ['1', 1] }]), code: 'BAD_MESSAGE' },
  { name: 'no values', setup: opened, frame: (tr) => points(tr, [{ seq: 1, t: 0, values: [] }]), code: 'BAD_MESSAGE' },
  { name: 'wrong number of values', setup: opened, frame: (tr) => points(tr, [{ seq: 1, t: 0, values: [1, 2, 3] }]), code: 'WRONG_VALUE_COUNT' },
  { name: 'no points', setup: opened, frame: (tr) => points(tr, []), code: 'BAD_MESSAGE' },
  { name: '1,001 points in one message', setup: opened, frame: (tr) => points(tr, Array.from({ length: 1001 }, (_, i) => pt(i + 1, i * 0.1))), code: 'BAD_MESSAGE' },
  // Unknown vignette or run, order of the conversation
  { name: 'unknown vignette', frame: (tr) => msg({ type: 'open', id: 'x', vignette: 'S9-L9', track: tr, source: 'live', channels: CH }), code: 'UNKNOWN_VIGNETTE' },
  { name: 'vignette named __proto__', frame: (tr) => msg({ type: 'open', id: 'x', vignette: '__proto__', track: tr, source: 'live', channels: CH }), code: 'UNKNOWN_VIGNETTE' },
  { name: 'unknown channel', frame: (tr) => open(tr, { channels: ['range', 'speed'] }), code: 'CHANNELS_MISMATCH' },
  { name: 'a channel twice', frame: (tr) => open(tr, { channels: ['range', 'range'] }), code: 'CHANNELS_MISMATCH' },
  { name: 'reopen with another source', setup: opened, frame: (tr) => open(tr, { source: 'sim', id: 'x' }), code: 'TRACK_CONFLICT' },
  { name: 'points for a run never opened', frame: (tr) => points(tr, [pt(1, 0)]), code: 'TRACK_NOT_OPEN' },
  { name: 'close before open', frame: (tr) => msg({ type: 'close', id: 'x', vignette: V, track: tr, lastSeq: 0 }), code: 'TRACK_NOT_OPEN' },
  { name: 'points after close', setup: (tr) => [open(tr), points(tr, [pt(1, 0)], 's1'), msg({ type: 'close', id: 'c', vignette: V, track: tr, lastSeq: 1 })], frame: (tr) => points(tr, [pt(2, 1)]), code: 'TRACK_CLOSED' },
  { name: 'close with points missing', setup: (tr) => [open(tr), points(tr, [pt(1, 0)], 's1')], frame: (tr) => msg({ type: 'close', id: 'x', vignette: V, track: tr, lastSeq: 9 }), code: 'INCOMPLETE' },
  { name: 'time reversal beyond the tolerance', setup: (tr) => [open(tr), points(tr, [pt(1, 100)], 's1')], frame: (tr) => points(tr, [pt(2, 50)]), code: 'TIME_REVERSED' },
  { name: 'duplicate seq with other data', setup: (tr) => [open(tr), points(tr, [pt(1, 0)], 's1')], frame: (tr) => points(tr, [pt(1, 0, 1, 1)]), code: 'DUPLICATE_CONFLICT' },
  { name: 'two seqs at the same time', setup: (tr) => [open(tr), points(tr, [pt(1, 0)], 's1')], frame: (tr) => points(tr, [pt(2, 0)]), code: 'DUPLICATE_TIME' },
  { name: 'note on an unknown vignette', frame: (tr) => msg({ type: 'note', id: 'x', vignette: 'nowhere', track: tr, text: 'hi' }), code: 'UNKNOWN_VIGNETTE' },
  { name: 'note of 3,000 characters', frame: () => msg({ type: 'note', id: 'x', text: 'n'.repeat(3000) }), code: 'BAD_MESSAGE' },
  { name: 'binary frame', frame: () => Buffer.from([0x7b, 0x00, 0xff, 0x10]), code: 'BAD_MESSAGE' },
];

describe('a corpus of bad messages over the feed', () => {
  it(`${CASES.length} distinct cases: each answered with its code and the message id, the connection and the service stay up`, async () => {
    expect(new Set(CASES.map((c) => c.name)).size).toBe(CASES.length);
    const p = await client(feed(server));
    // An accepted run before the corpus: it must come through untouched.
    p.ws.send(open('kept'));
    await p.next((r) => r.id === 'open-kept');
    p.ws.send(points('kept', [pt(1, 0), pt(2, 1), pt(3, 2)], 'kept-1'));
    expect((await p.next((r) => r.id === 'kept-1' && r.type === 'ack')).committedSeq).toBe(3);

    const seen: Record<string, string> = {};
    for (const [i, c] of CASES.entries()) {
      const track = `case-${i}`;
      for (const f of c.setup?.(track) ?? []) p.ws.send(f);
      // The replies to the setup come first (per connection, in order): wait for a ping's pong.
      p.ws.send(msg({ type: 'ping', id: `before-${i}` }));
      await p.next((r) => r.id === `before-${i}`);
      const from = p.replies.length;
      const frame = c.frame(track);
      p.ws.send(frame, { binary: Buffer.isBuffer(frame) });
      p.ws.send(msg({ type: 'ping', id: `after-${i}` }));
      await p.next((r) => r.id === `after-${i}`);
      const errors = p.replies.slice(from).filter((r) => r.type === 'error');
      seen[c.name] = errors.map((e) => e.code).join(',') || 'no error';
      expect(errors.length, c.name).toBe(1);
      expect(errors[0].code, c.name).toBe(c.code);
      expect(String(errors[0].reason).length, c.name).toBeGreaterThan(10);
      expect(ERROR_CODES[errors[0].code as ErrorCode], c.name).toBeDefined();
    }
    expect(p.ws.readyState).toBe(WebSocket.OPEN);
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    // Nothing accepted was lost, and the run closes normally.
    p.ws.send(points('kept', [pt(4, 3)], 'kept-2'));
    expect((await p.next((r) => r.id === 'kept-2' && r.type === 'ack')).committedSeq).toBe(4);
    p.ws.send(msg({ type: 'close', id: 'kept-close', vignette: V, track: 'kept', lastSeq: 4 }));
    expect((await p.next((r) => r.id === 'kept-close')).type).toBe('closed');
    expect(server.service.detail(V, 'kept')?.raw.t).toEqual([0, 1, 2, 3]);
    expect((await fetch(`${server.url}/healthz`)).status).toBe(200);
    p.ws.close();
  });

  it('a dashboard connection may not produce (NOT_PERMITTED)', async () => {
    const w = await client(`${server.url.replace('http', 'ws')}/watch`);
    await w.next((r) => r.type === 'snapshot');
    w.ws.send(points('kept', [pt(9, 9)], 'w-points'));
    expect((await w.next((r) => r.id === 'w-points')).code).toBe('NOT_PERMITTED');
    w.ws.close();
  });

  it('invalid UTF-8 in a text frame closes that connection with 1007', async () => {
    const c = await client(feed(server));
    c.ws.send(Buffer.from([0x7b, 0xff, 0xfe, 0x7d]), { binary: false });
    expect(await c.closed).toBe(1007);
  });

  it('a frame over 64 KiB closes that connection with 1009', async () => {
    const c = await client(feed(server));
    c.ws.send(msg({ type: 'note', id: 'x', text: 'y'.repeat(70 * 1024) }));
    expect(await c.closed).toBe(1009);
  });

  it('a flood from one connection is answered RATE_LIMITED, then closed with 1008; others are served', async () => {
    const s = await startServer({ planPath, journalPath: join(dir, 'flood.sqlite'), port: 0, inProcessCompute: true, limits: { messagesPerSecond: 50, messageBurst: 20, floodStrikes: 30 } });
    try {
      const f = await client(feed(s));
      for (let i = 0; i < 300; i++) f.ws.send(msg({ type: 'ping', id: `f${i}` }));
      expect(await f.closed).toBe(1008);
      expect(f.replies.some((r) => r.code === 'RATE_LIMITED')).toBe(true);
      const calm = await client(feed(s));
      calm.ws.send(msg({ type: 'ping', id: 'calm' }));
      expect((await calm.next((r) => r.id === 'calm')).type).toBe('pong');
      calm.ws.close();
    } finally {
      await s.close();
    }
  });

  it('half-open connections (an upgrade request never finished, a socket gone quiet) do not stop the service; a watcher that never reads is dropped with a note in the log', async () => {
    const lines: string[] = [];
    const s = await startServer({ planPath, journalPath: join(dir, 'quiet.sqlite'), port: 0, inProcessCompute: true, limits: { heartbeatMs: 200 }, log: (l) => lines.push(l) });
    try {
      // 1. Headers of an upgrade request, never finished.
      const raw = connect(s.port, '127.0.0.1');
      await new Promise<void>((r) => raw.once('connect', () => r()));
      raw.write('GET /feed HTTP/1.1\r\nHost: 127.0.0.1\r\nUpgrade: websocket\r\n');
      // 2. A dashboard that stops reading: its socket is paused, so it answers no ping.
      const quiet = await client(`${s.url.replace('http', 'ws')}/watch`);
      await quiet.next((r) => r.type === 'snapshot');
      (quiet.ws as unknown as { _socket: { pause(): void } })._socket.pause();
      // Meanwhile a producer is served as usual.
      const p = await client(feed(s));
      p.ws.send(open('quiet-run'));
      await p.next((r) => r.id === 'open-quiet-run');
      for (let k = 0; k < 10; k++) {
        p.ws.send(points('quiet-run', [pt(k + 1, k)], `q${k}`));
        expect((await p.next((r) => r.id === `q${k}` && r.type === 'ack')).committedSeq).toBe(k + 1);
        await new Promise((r) => setTimeout(r, 60));
      }
      const deadline = Date.now() + 5000;
      while (!lines.some((l) => l.includes('dropping a dashboard')) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
      expect(lines.filter((l) => l.includes('dropping a dashboard'))).toHaveLength(1);
      expect(p.ws.readyState).toBe(WebSocket.OPEN);
      raw.destroy();
      p.ws.close();
      quiet.ws.terminate();
    } finally {
      await s.close();
    }
  });
});

describe('HTTP: path tricks and bad requests', () => {
  const cases: Array<[string, string, number]> = [
    ['dot-dot path', '/../secret.txt', 404],
    ['encoded dot-dot', '/%2e%2e/secret.txt', 404],
    ['encoded slash after dot-dot', '/..%2fsecret.txt', 404],
    ['encoded backslash after dot-dot', '/..%5csecret.txt', 404],
    ['NUL in the path', '/index.html%00.png', 404],
    ['encoded slash in a run name', '/api/runs/%2F..%2F/x', 404],
    ['broken percent-encoding', '/%E0%A4%A', 400],
    ['unknown endpoint', '/api/nothing', 404],
  ];
  it.each(cases)('%s (%s) → %i', async (_name, path, status) => {
    // A static folder with a page, and a file beside it that must not be reachable.
    mkdirSync(join(dir, 'static'), { recursive: true });
    writeFileSync(join(dir, 'static', 'index.html'), '<!doctype html><title>t</title>');
    writeFileSync(join(dir, 'secret.txt'), 'root:x:0:0');
    const s = await startServer({ planPath, journalPath: join(dir, 'http.sqlite'), port: 0, inProcessCompute: true, staticDir: join(dir, 'static') });
    try {
      // A raw request, so the client does not normalise the path.
      const text = await new Promise<string>((resolve, reject) => {
        const sock = connect(s.port, '127.0.0.1', () => sock.write(`GET ${path} HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: close\r\n\r\n`));
        let out = '';
        sock.on('data', (d) => (out += d.toString()));
        sock.on('end', () => resolve(out));
        sock.on('error', reject);
      });
      expect(text.split('\r\n')[0]).toBe(`HTTP/1.1 ${status} ${status === 404 ? 'Not Found' : 'Bad Request'}`);
      expect(text).not.toContain('root:');
    } finally {
      await s.close();
    }
  });
});

describe('properties of the message parser (fast-check)', () => {
  const codes = new Set(Object.keys(ERROR_CODES));
  const anyText = fc.oneof(fc.string({ maxLength: 200 }), fc.string({ unit: 'binary', maxLength: 200 }), fc.json({ maxDepth: 4 }));
  propTest.prop([anyText], { seed: 7, numRuns: 500 })('any text: a message or a stable error code, never a throw', (text) => {
    const r = parseClientMessage(text);
    if (!r.ok) {
      expect(codes.has(r.error.code)).toBe(true);
      expect(r.error.reason.length).toBeGreaterThan(0);
    } else {
      expect(['open', 'points', 'close', 'note', 'ping']).toContain(r.message.type);
    }
  });

  const ident = fc.string({ minLength: 1, maxLength: 20 }).filter((s) => !/[\u0000-\u001f\u007f]/.test(s));
  const point = fc.record({ seq: fc.integer({ min: 1, max: 1e9 }), t: fc.double({ min: 0, max: 1e6, noNaN: true }), values: fc.array(fc.double({ noNaN: true, noDefaultInfinity: true }), { minLength: 1, maxLength: 4 }) });
  const valid = fc.oneof(
    fc.record({ v: fc.constant(1), type: fc.constant('open'), id: ident, vignette: ident, track: ident, source: fc.constantFrom('live', 'sim'), channels: fc.array(fc.string(), { minLength: 1, maxLength: 3 }) }),
    fc.record({ v: fc.constant(1), type: fc.constant('points'), id: ident, vignette: ident, track: ident, points: fc.array(point, { minLength: 1, maxLength: 5 }) }),
    fc.record({ v: fc.constant(1), type: fc.constant('close'), id: ident, vignette: ident, track: ident, lastSeq: fc.nat() }),
    fc.record({ v: fc.constant(1), type: fc.constant('ping'), id: ident }),
  );
  propTest.prop([valid], { seed: 8, numRuns: 300 })('every message the schema allows parses to itself', (m) => {
    const r = parseClientMessage(JSON.stringify(m));
    expect(r.ok).toBe(true);
    if (r.ok) expect(r.message).toEqual(JSON.parse(JSON.stringify(m)));
  });

  // Damage a valid message: drop, retype or add one field; the result is refused with BAD_MESSAGE.
  const damaged = fc.tuple(valid, fc.nat(), fc.constantFrom('drop', 'retype', 'add')).map(([m, k, how]) => {
    const o: Record<string, unknown> = { ...m };
    const keys = Object.keys(o).filter((x) => x !== 'v' && x !== 'type');
    const key = keys[k % keys.length];
    if (how === 'drop') delete o[key];
    else if (how === 'retype') o[key] = typeof o[key] === 'string' ? 12 : 'text';
    else o.extra = 1;
    return o;
  });
  propTest.prop([damaged], { seed: 9, numRuns: 300 })('a valid message with one field dropped, retyped or added is BAD_MESSAGE', (m) => {
    const r = parseClientMessage(JSON.stringify(m));
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.code).toBe('BAD_MESSAGE');
  });
});

describe('fuzzing a live connection (fast-check)', () => {
  it('200 random frames, well-formed and not: the service stays up and the accepted run is intact', async () => {
    const p = await client(feed(server));
    p.ws.send(open('fuzz-kept'));
    await p.next((r) => r.id === 'open-fuzz-kept');
    p.ws.send(points('fuzz-kept', [pt(1, 0), pt(2, 1)], 'fk1'));
    await p.next((r) => r.id === 'fk1' && r.type === 'ack');
    const frame = fc.oneof(
      fc.string({ maxLength: 300 }),
      fc.json({ maxDepth: 3 }),
      fc.record({ v: fc.constantFrom(1, 2, '1'), type: fc.constantFrom('open', 'points', 'close', 'note', 'ping', 'x'), id: fc.string({ maxLength: 5 }), vignette: fc.constantFrom(V, 'S2-L2', 'nope'), track: fc.constantFrom('fuzz-a', 'fuzz-b', 'fuzz-kept'), source: fc.constantFrom('live', 'sim'), channels: fc.constantFrom(CH, ['bearing', 'range'], ['x']), lastSeq: fc.integer({ min: -1, max: 5 }), text: fc.string({ maxLength: 10 }), points: fc.array(fc.record({ seq: fc.integer({ min: -1, max: 6 }), t: fc.oneof(fc.double(), fc.integer({ min: 0, max: 400 })), values: fc.array(fc.oneof(fc.double(), fc.integer()), { maxLength: 3 }) }), { maxLength: 4 }) }, { requiredKeys: ['v', 'type', 'id'] }).map((o) => JSON.stringify(o)),
    );
    const frames = fc.sample(frame, { seed: 10, numRuns: 200 });
    for (const f of frames) p.ws.send(f);
    p.ws.send(msg({ type: 'ping', id: 'fuzz-done' }));
    await p.next((r) => r.id === 'fuzz-done');
    for (const r of p.replies) if (r.type === 'error') expect(Object.keys(ERROR_CODES)).toContain(r.code);
    expect(p.replies.some((r) => r.code === 'INTERNAL')).toBe(false);
    expect(server.service.detail(V, 'fuzz-kept')?.raw.t.slice(0, 2)).toEqual([0, 1]);
    expect((await fetch(`${server.url}/healthz`)).status).toBe(200);
    p.ws.close();
  });
});
