/**
 * A source defined here, in the test, plugs into the service through the `Source` interface
 * (ingest/service/source.ts) and nothing else: its messages go through `submit` to the same
 * validate → journal → acknowledge path as the WebSocket feed. The reference for every reply is
 * the feed itself: the same messages sent over `/feed` (with the `ws` client from npm) on another
 * track must get the same replies, and the journal must hold each accepted point once.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';
import { afterAll, describe, expect, it } from 'vitest';
import type { ClientMessage, ServerReply } from '../../../ingest/service/protocol.js';
import { startServer, type RunningServer } from '../../../ingest/service/server.js';
import type { Source, Submit } from '../../../ingest/service/source.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-source-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const planPath = join(dir, 'plan.json');
writeFileSync(planPath, JSON.stringify({ name: 'harbour approach, source test', channels: [{ name: 'x', unit: 'm' }, { name: 'y', unit: 'm' }], vignettes: [{ id: 'H1', horizon: 100 }] }));

/** The producer messages of one run: good points, a resend, refusals of four kinds, a close. */
function script(track: string): ClientMessage[] {
  const at = (seq: number, t: number, values: number[]) => ({ seq, t, values });
  const pts = (id: string, points: Array<{ seq: number; t: number; values: number[] }>): ClientMessage => ({ v: 1, type: 'points', id, vignette: 'H1', track, points });
  return [
    { v: 1, type: 'open', id: 'o', vignette: 'H1', track, source: 'live', channels: ['y', 'x'] },
    pts('p1', [at(1, 10, [10, 1]), at(2, 11, [11, 2]), at(3, 12, [12, 3])]),
    // seq 3 again with its data (a duplicate), then five refusals, then a good point after a gap
    pts('p2', [at(3, 12, [12, 3]), at(4, 1, [1, 1]), at(5, 13, [1]), at(6, 150, [1, 1]), at(2, 11, [99, 2]), at(8, 11, [1, 1]), at(7, 13, [13, 4])]),
    // the whole first message sent again: nothing new, three duplicates
    pts('p3', [at(1, 10, [10, 1]), at(2, 11, [11, 2]), at(3, 12, [12, 3])]),
    // 4..6 are missing: the close is refused until they come
    { v: 1, type: 'close', id: 'c', vignette: 'H1', track, lastSeq: 7 },
    pts('p4', [at(4, 12.5, [1, 1]), at(5, 12.7, [1, 1]), at(6, 12.9, [1, 1])]),
    { v: 1, type: 'close', id: 'c2', vignette: 'H1', track, lastSeq: 7 },
    pts('p5', [at(8, 14, [1, 1])]),
  ];
}

/** The last reply a message gets: a points message with refusals gets an error, then its ack. */
const done = (m: ClientMessage, r: ServerReply) => r.id === m.id && !(m.type === 'points' && r.type === 'error' && 'rejected' in r && r.rejected);

/** The tiny source: sends its script one message at a time, each once the previous one is answered. */
class ScriptSource implements Source {
  readonly name = 'script';
  readonly replies: ServerReply[] = [];
  private sent = 0;
  private refused: Record<string, number> = {};
  stopped = 0;
  finished?: Promise<void>;

  constructor(private readonly messages: ClientMessage[]) {}

  start(submit: Submit): void {
    this.finished = (async () => {
      for (const m of this.messages) {
        await new Promise<void>((res) => {
          this.sent++;
          submit(m, (r) => {
            this.replies.push(r);
            if (r.type === 'error') for (const x of 'rejected' in r && r.rejected ? r.rejected : [{ code: r.code }]) this.refused[x.code] = (this.refused[x.code] ?? 0) + 1;
            if (done(m, r)) res();
          });
        });
      }
    })();
  }

  counters() {
    return { sent: this.sent, replies: this.replies.length, refused: { ...this.refused } };
  }

  async stop(): Promise<void> {
    this.stopped++;
    await this.finished;
  }
}

/** The same script over the WebSocket feed, one message at a time. */
async function overFeed(server: RunningServer, messages: ClientMessage[]): Promise<ServerReply[]> {
  const ws = new WebSocket(`ws://127.0.0.1:${server.port}/feed`);
  await new Promise((res, rej) => ws.once('open', res).once('error', rej));
  const replies: ServerReply[] = [];
  for (const m of messages) {
    await new Promise<void>((res) => {
      const on = (data: WebSocket.RawData) => {
        const r = JSON.parse(data.toString()) as ServerReply;
        replies.push(r);
        if (done(m, r)) {
          ws.off('message', on);
          res();
        }
      };
      ws.on('message', on);
      ws.send(JSON.stringify(m));
    });
  }
  ws.close();
  return replies;
}

const withoutTrack = (r: ServerReply) => JSON.parse(JSON.stringify(r).replaceAll('"feed-1"', '"T"').replaceAll('"src-1"', '"T"').replaceAll('H1/feed-1', 'H1/T').replaceAll('H1/src-1', 'H1/T')) as unknown;

describe('an in-process source', () => {
  it('feeds the pipeline through submit: the same acks and refusals (with codes) as the feed, nothing journaled twice, counters in /healthz', async () => {
    const source = new ScriptSource(script('src-1'));
    const server = await startServer({ planPath, journalPath: join(dir, 'a.sqlite'), port: 0, sources: [source] });
    try {
      await source.finished;
      const feed = await overFeed(server, script('feed-1'));
      expect(source.replies.map(withoutTrack)).toEqual(feed.map(withoutTrack));

      const codes = source.replies.flatMap((r): Array<[number | undefined, string]> => (r.type !== 'error' ? [] : r.rejected ? r.rejected.map((x): [number, string] => [x.seq, x.code]) : [[undefined, r.code]]));
      expect(codes).toEqual([
        [4, 'TIME_REVERSED'],
        [5, 'WRONG_VALUE_COUNT'],
        [6, 'BEYOND_HORIZON'],
        [2, 'DUPLICATE_CONFLICT'],
        [8, 'DUPLICATE_TIME'],
        [undefined, 'INCOMPLETE'],
        [undefined, 'TRACK_CLOSED'],
      ]);
      const acks = source.replies.filter((r) => r.type === 'ack');
      expect(acks.map((r) => r.type === 'ack' && [r.id, r.committedSeq, r.accepted, r.duplicates])).toEqual([
        ['p1', 3, 3, 0],
        ['p2', 3, 1, 1],
        ['p3', 3, 0, 3],
        ['p4', 7, 3, 0],
      ]);
      expect(source.replies.filter((r) => r.type === 'closed').map((r) => r.id)).toEqual(['c2']);

      const rows: Array<[number, number]> = [];
      const id = server.journal.tracks().find((t) => t.track === 'src-1')!.id;
      server.journal.eachPoint((p) => {
        if (p.trackId === id) rows.push([p.seq, p.t]);
      });
      expect(rows.sort((a, b) => a[0] - b[0])).toEqual([[1, 10], [2, 11], [3, 12], [4, 12.5], [5, 12.7], [6, 12.9], [7, 13]]);
      // the points are in the service's run, in the plan's channel order (the source sent y, x)
      const detail = server.service.detail('H1', 'src-1');
      expect(detail?.run).toMatchObject({ points: 7, status: 'complete' });
      expect(detail?.raw.values[0]).toEqual([1, 2, 3, 1, 1, 1, 4]);

      const health = (await (await fetch(`${server.url}/healthz`)).json()) as { sources: Array<{ name: string; counters: ReturnType<ScriptSource['counters']> }> };
      expect(health.sources).toEqual([{ name: 'script', counters: { sent: 8, replies: source.replies.length, refused: { TIME_REVERSED: 1, WRONG_VALUE_COUNT: 1, BEYOND_HORIZON: 1, DUPLICATE_CONFLICT: 1, DUPLICATE_TIME: 1, INCOMPLETE: 1, TRACK_CLOSED: 1 } } }]);
    } finally {
      await server.close();
    }
    expect(source.stopped).toBe(1);
  });

  it('a source that fails to start stops the server start with its own error; a second source of the same name is refused', async () => {
    const failing: Source = { name: 'broken', start: () => Promise.reject(new Error('no socket')), stop: () => Promise.resolve(), counters: () => ({}) };
    await expect(startServer({ planPath, journalPath: join(dir, 'b.sqlite'), port: 0, sources: [failing] })).rejects.toThrow('no socket');
    const server = await startServer({ planPath, journalPath: join(dir, 'b.sqlite'), port: 0 });
    try {
      const a = new ScriptSource([]);
      await server.addSource(a);
      await expect(server.addSource(new ScriptSource([]))).rejects.toMatchObject({ code: 'SOURCE_FAILED' });
      expect(server.sources.map((s) => s.name)).toEqual(['script']);
    } finally {
      await server.close();
    }
  });
});
