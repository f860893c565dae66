/**
 * A streaming producer of the feed protocol (v1, ingest/service/protocol.ts) over WebSocket: the
 * output of `plumbline dis-bridge`. The track bookkeeping (buffer until acknowledged, batch,
 * window, close after the last commit) is `TrackOutbox` (run-output.ts). After a lost connection
 * the client reconnects (bounded backoff), opens its tracks again and resends from each track's
 * committed sequence number, as `plumbline replay` does.
 */
import WebSocket from 'ws';
import type { ClientMessage, ServerReply } from '../service/protocol.js';
import { TrackOutbox, type OutboxOptions } from './run-output.js';

export interface FeedClientOptions extends OutboxOptions {
  readonly url: string;
  readonly token?: string;
  readonly maxReconnects?: number;
}

export class FeedClientError extends Error {
  constructor(readonly code: 'CONNECT_FAILED' | 'REFUSED', message: string) {
    super(message);
    this.name = 'FeedClientError';
  }
}

export class FeedClient extends TrackOutbox {
  private ws?: WebSocket;
  private stopped = false;
  private reconnecting?: Promise<void>;
  reconnects = 0;

  constructor(private readonly options: FeedClientOptions) {
    super(options);
  }

  async connect(): Promise<void> {
    const max = this.options.maxReconnects ?? 20;
    for (let attempt = 0; ; attempt++) {
      try {
        const s = await new Promise<WebSocket>((res, rej) => {
          const w = new WebSocket(this.options.url, { headers: this.options.token ? { authorization: `Bearer ${this.options.token}` } : {} });
          w.once('open', () => res(w));
          w.once('error', rej);
          w.once('unexpected-response', (_req, resp) => rej(new FeedClientError('REFUSED', `the service refused the connection: ${resp.statusCode} ${resp.statusMessage ?? ''}`)));
        });
        this.attach(s);
        return;
      } catch (e) {
        if (e instanceof FeedClientError) throw e;
        if (attempt >= max || this.stopped) throw new FeedClientError('CONNECT_FAILED', `cannot reach ${this.options.url}: ${e instanceof Error ? e.message : String(e)}`);
        await new Promise((r) => setTimeout(r, Math.min(5000, 200 * 2 ** attempt)));
      }
    }
  }

  private attach(s: WebSocket): void {
    this.ws = s;
    s.on('message', (d) => {
      let r: ServerReply;
      try {
        r = JSON.parse(d.toString()) as ServerReply;
      } catch {
        this.count('BAD_REPLY');
        return;
      }
      this.onReply(r);
    });
    s.on('error', () => undefined);
    s.on('close', () => {
      if (this.ws !== s) return;
      this.ws = undefined;
      if (!this.stopped) this.reconnect();
    });
    this.reopenAll();
  }

  private reconnect(): void {
    if (this.reconnecting) return;
    this.reconnects++;
    this.say(`feed connection lost; reconnecting (${this.reconnects})`);
    this.reconnecting = this.connect()
      .catch((e: unknown) => this.say(`feed: ${e instanceof Error ? e.message : String(e)}`))
      .finally(() => {
        this.reconnecting = undefined;
      });
  }

  protected transmit(message: ClientMessage): boolean {
    const ws = this.ws;
    if (!ws || ws.readyState !== WebSocket.OPEN) return false;
    ws.send(JSON.stringify(message));
    return true;
  }

  stop(): void {
    this.stopped = true;
    this.ws?.close();
    this.ws = undefined;
  }
}
