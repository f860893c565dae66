/** Shared pieces of the broker tests: the demo event's files, monitors in this process, journal contents. */
import { join } from 'node:path';
import type { RawTrack } from '../../../engine/types.js';
import type { Journal } from '../../../ingest/service/journal.js';
import { startServer, type RunningServer } from '../../../ingest/service/server.js';
import { startMonitor, type Monitor } from '../../../ingest/broker/monitor.js';
import { connectBroker } from '../../../ingest/broker/streams.js';
import type { Layout } from '../../../ingest/broker/subjects.js';

export interface InProcessMonitor {
  readonly server: RunningServer;
  readonly monitor: Monitor;
  readonly lines: string[];
  close(): Promise<void>;
}

export async function inProcessMonitor(o: { broker: string; layout: Layout; dir: string; name: string; plan: string; baseline: string; vignettes: readonly string[] }): Promise<InProcessMonitor> {
  const lines: string[] = [];
  const server = await startServer({ planPath: o.plan, baselinePath: o.baseline, journalPath: join(o.dir, `${o.name}.sqlite`), port: 0, log: (l) => lines.push(l) });
  const nc = await connectBroker(o.broker, o.name);
  const monitor = await startMonitor({ server, nc, layout: o.layout, vignettes: o.vignettes, shard: o.name, log: (l) => lines.push(l) });
  return {
    server,
    monitor,
    lines,
    async close() {
      await monitor.close();
      await nc.drain();
      await server.close();
    },
  };
}

/** Every journaled point, as `vignette/run` → seq → "t|v1|v2…" (a point journaled twice would show as a count above one). */
export function journalPoints(journal: Journal): { points: Map<string, Map<number, string>>; doubled: number; closed: Set<string> } {
  const tracks = new Map(journal.tracks().map((t) => [t.id, t]));
  const points = new Map<string, Map<number, string>>();
  let doubled = 0;
  journal.eachPoint((p) => {
    const t = tracks.get(p.trackId);
    if (!t || t.source !== 'live') return;
    const key = `${t.vignette}/${t.track}`;
    let m = points.get(key);
    if (!m) points.set(key, (m = new Map()));
    if (m.has(p.seq)) doubled++;
    m.set(p.seq, [p.t, ...p.values].join('|'));
  });
  const closed = new Set([...tracks.values()].filter((t) => t.source === 'live' && t.closedAt !== null).map((t) => `${t.vignette}/${t.track}`));
  return { points, doubled, closed };
}

/** What was published of `tracks`, in the journal's form (values in the plan's channel order, as published). */
export function publishedPoints(tracks: readonly RawTrack[]): Map<string, Map<number, string>> {
  const out = new Map<string, Map<number, string>>();
  for (const t of tracks) {
    const m = new Map<number, string>();
    for (let i = 0; i < t.t.length; i++) m.set(i + 1, [t.t[i], ...t.values.map((v) => v[i])].join('|'));
    out.set(`${t.vignette}/${t.track}`, m);
  }
  return out;
}

export async function waitFor(what: string, pred: () => boolean | Promise<boolean>, timeoutMs = 120_000): Promise<void> {
  const until = Date.now() + timeoutMs;
  while (!(await pred())) {
    if (Date.now() > until) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}
