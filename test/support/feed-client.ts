/**
 * A test client of the service's WebSocket endpoints (/feed, /watch): it keeps every reply and
 * waits for the first one that matches a predicate (already received or still to come).
 */
import WebSocket from 'ws';

export type Reply = Record<string, unknown>;

export interface FeedClient {
  readonly ws: WebSocket;
  readonly replies: Reply[];
  next(pred: (r: Reply) => boolean, ms?: number): Promise<Reply>;
  readonly closed: Promise<number>;
}

export async function feedClient(url: string): Promise<FeedClient> {
  const ws = new WebSocket(url);
  const replies: Reply[] = [];
  const waiters: Array<{ pred: (r: Reply) => boolean; resolve: (r: Reply) => void }> = [];
  ws.on('message', (d) => {
    const m = JSON.parse(d.toString()) as Reply;
    // A dashboard's `updates` message carries several deltas: each is kept as a reply of its own.
    for (const r of m.type === 'updates' && Array.isArray(m.updates) ? (m.updates as Reply[]) : [m]) {
      replies.push(r);
      for (const w of [...waiters]) if (w.pred(r)) { waiters.splice(waiters.indexOf(w), 1); w.resolve(r); }
    }
  });
  const closed = new Promise<number>((r) => ws.once('close', (code) => r(code)));
  await new Promise<void>((res, rej) => { ws.once('open', () => res()); ws.once('error', rej); });
  const next = (pred: (r: Reply) => boolean, ms = 10_000) =>
    new Promise<Reply>((resolve, reject) => {
      const found = replies.find(pred);
      if (found) return resolve(found);
      const timer = setTimeout(() => reject(new Error(`no matching reply within ${ms} ms`)), ms);
      waiters.push({ pred, resolve: (r) => { clearTimeout(timer); resolve(r); } });
    });
  return { ws, replies, next, closed };
}
