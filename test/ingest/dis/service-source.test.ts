/**
 * The DIS source inside the service (`serve --dis`, the plan's `sources.dis`): the real service
 * in-process (port 0) with the source on a loopback UDP port, fed Entity State PDUs that the npm
 * `open-dis` 1.3.6 package encoded (an independent encoder), over unicast and a multicast group.
 * The entity moves on a known path (range 500 + 15t m, bearing 200 + 2t degrees at the sensor
 * site), placed in geocentric coordinates with the transpose of the EPSG Guidance Note 7-2 method
 * 9836 rotation written out here, so the expected channel values are known analytically.
 */
import { createSocket, type Socket } from 'node:dgram';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { closedLine, startDisSource, type RunningDisSource } from '../../../ingest/dis/bridge.js';
import { FeedClient } from '../../../ingest/dis/feed-client.js';
import { resolveMapping, type DisSourceDocument } from '../../../ingest/dis/mapping.js';
import { startServiceDisSource } from '../../../ingest/dis/service-source.js';
import { startServeDis } from '../../../ingest/cli/serve-dis.js';
import { encodeTimestamp } from '../../../ingest/dis/time.js';
import { enuToEcef as enuAtSite } from './enu.js';
import { parsePlanWithSources } from '../../../ingest/plan.js';
import { startServer, type RunningServer } from '../../../ingest/service/server.js';
import { encodeWith, loadOpenDis, type OpenDisRecord } from './open-dis.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-dis-serve-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

// An invented sensor site (no real place intended).
const SITE = { lat: -21.75, lon: 47.5, height: 9 };
const DIS_BLOCK: DisSourceDocument = {
  listen: 'udp://127.0.0.1:0',
  silence: 1.5,
  sites: { breakwater: SITE },
  entities: [{ exercise: 4, site: 7, application: 8, entity: 9, vignette: 'A1', track: 'usv-9', sensor: 'breakwater' }],
};
const PLAN_DOC = {
  name: 'DIS in the service (invented)',
  channels: [
    { name: 'range', unit: 'm' },
    { name: 'bearing', unit: 'deg', period: 360 },
  ],
  vignettes: [{ id: 'A1', horizon: 15 }],
  sources: { dis: DIS_BLOCK },
};
const { plan, sources } = parsePlanWithSources(JSON.stringify(PLAN_DOC), 'plan.json');
const planPath = join(dir, 'plan.json');
writeFileSync(planPath, JSON.stringify(PLAN_DOC));

const enuAt = (e: number, n: number, u: number) => enuAtSite(SITE, e, n, u);
const pathRange = (t: number) => 500 + 15 * t;
const pathBearing = (t: number) => 200 + 2 * t;

const openDis = { 6: loadOpenDis(6), 7: loadOpenDis(7) };
/** An Entity State PDU of entity 7:8:9 at path time t, encoded by open-dis. */
function openDisPdu(t: number, version: 6 | 7, entity = 9): Uint8Array {
  const dis = openDis[version];
  const pdu = new dis.EntityStatePdu();
  const b = (pathBearing(t) * Math.PI) / 180;
  const [x, y, z] = enuAt(pathRange(t) * Math.sin(b), pathRange(t) * Math.cos(b), 0);
  pdu.protocolVersion = version;
  pdu.exerciseID = 4;
  pdu.timestamp = encodeTimestamp(1000 + t, true);
  if (version === 6) {
    pdu.pduLength = 144;
    Object.assign(pdu.entityID as object, { site: 7, application: 8, entity });
  } else {
    pdu.length = 144;
    Object.assign(pdu.entityID as object, { siteID: 7, applicationID: 8, entityID: entity });
  }
  Object.assign(pdu.entityLocation as OpenDisRecord, { x, y, z });
  return encodeWith(dis, pdu);
}

const TIMES = Array.from({ length: 31 }, (_, k) => k * 0.5);

/** 40 simulated runs around the path (seeded linear congruential draws, Numerical Recipes constants). */
const baselinePath = join(dir, 'baseline.csv');
{
  let state = 20261202;
  const uniform = () => ((state = (Math.imul(state, 1664525) + 1013904223) >>> 0) / 2 ** 32) - 0.5;
  const rows = ['vignette,track,t,range,bearing'];
  for (let k = 0; k < 40; k++) {
    const [a, b, c] = [20 * uniform(), 2 * uniform(), 3 * uniform()];
    for (const t of TIMES) rows.push(`A1,sim-${k},${t},${pathRange(t) + a + b * t + 2 * uniform()},${pathBearing(t) + c + 0.2 * uniform()}`);
  }
  writeFileSync(baselinePath, `${rows.join('\n')}\n`);
}

async function sendAll(tx: Socket, port: number, host: string, datagrams: Uint8Array[]): Promise<void> {
  for (const d of datagrams) {
    await new Promise<void>((res, rej) => tx.send(d, port, host, (e) => (e ? rej(e) : res())));
    await new Promise((r) => setTimeout(r, 2));
  }
}

async function until(check: () => boolean, ms = 15_000): Promise<void> {
  const end = Date.now() + ms;
  while (!check() && Date.now() < end) await new Promise((r) => setTimeout(r, 25));
}

describe('plan sources.dis', () => {
  it('is parsed with its defaults and kept out of the event plan (the journal compares the plan without it)', () => {
    expect(sources.dis).toMatchObject({ listen: 'udp://127.0.0.1:0', silence: 1.5, entities: [{ conversion: 'range-bearing', source: 'live' }] });
    expect(Object.keys(plan)).not.toContain('sources');
    const { sources: none } = parsePlanWithSources(JSON.stringify({ ...PLAN_DOC, sources: undefined }), 'p.json');
    expect(none).toEqual({});
  });
});

describe('serve with the DIS source in the service process', () => {
  it('unicast: PDUs encoded by open-dis become a run, journaled, acknowledged and closed after the silence; the same as over the WebSocket feed', async () => {
    const events: string[] = [];
    const server = await startServer({ plan, baselinePath, journalPath: join(dir, 'uni.sqlite'), port: 0, inProcessCompute: true });
    let source: RunningDisSource | undefined;
    const tx = createSocket('udp4');
    // the same datagrams, versions 6 and 7 alternating, with junk and an unmapped entity among them
    const datagrams = TIMES.flatMap((t, k) => (k === 5 ? [openDisPdu(t, 7), new Uint8Array([7, 4, 1, 1, 0]), openDisPdu(t, 6, 99)] : [openDisPdu(t, k % 2 === 0 ? 7 : 6)]));
    try {
      source = await startServiceDisSource({ server, plan, config: sources.dis!, onEvent: (l) => events.push(l) });
      await sendAll(tx, source.address.port, '127.0.0.1', datagrams);
      await until(() => events.includes('run A1/usv-9 closed'));
      const detail = server.service.detail('A1', 'usv-9');
      expect(detail?.run.status).toBe('complete');
      const raw = detail!.raw;
      expect(raw.t.length).toBe(TIMES.length);
      raw.t.forEach((t, i) => {
        expect(Math.abs(t - TIMES[i])).toBeLessThan(1e-5); // one DIS time unit is 3600/2^31 s ≈ 1.7 µs
        expect(Math.abs(raw.values[0][i] - pathRange(TIMES[i]))).toBeLessThan(1e-3);
        expect(Math.abs(raw.values[1][i] - pathBearing(TIMES[i]))).toBeLessThan(1e-6);
      });
      const c = source.counters();
      expect(c).toMatchObject({ points: TIMES.length, runsOpened: 1, runsClosed: 1, unmapped: 1, bad: { PDU_SHORT_HEADER: 1 }, refused: {} });
      expect(events).toContain('run A1/usv-9 opened');

      // the same datagrams through the WebSocket feed (the `dis-bridge` wiring) into a second service
      const other = await startServer({ plan, baselinePath, journalPath: join(dir, 'ws.sqlite'), port: 0, inProcessCompute: true });
      const wsEvents: string[] = [];
      const feed = new FeedClient({ url: `${other.url.replace('http', 'ws')}/feed`, channels: plan.channels.map((ch) => ch.name), onClosed: (v, t, a) => wsEvents.push(closedLine(v, t, a)) });
      await feed.connect();
      const bridge = await startDisSource({ host: '127.0.0.1', port: 0, output: feed, plan, entries: resolveMapping(sources.dis!, plan), silence: 1.5 });
      try {
        await sendAll(tx, bridge.address.port, '127.0.0.1', datagrams);
        await until(() => wsEvents.includes('run A1/usv-9 closed'));
        const viaWs = other.service.detail('A1', 'usv-9');
        expect(viaWs?.run.status).toBe('complete');
        expect(viaWs?.raw).toEqual(raw);
        // the assessment of the run: judged, and the same in both services
        await until(() => server.service.exportReport().runs[0]?.overall !== undefined && other.service.exportReport().runs[0]?.overall !== undefined);
        const judged = server.service.exportReport().runs;
        expect(judged).toHaveLength(1);
        expect(judged[0]).toMatchObject({ status: 'assessed', samples: TIMES.length, overall: { pValue: expect.any(Number) } });
        expect(other.service.exportReport().runs).toEqual(judged);
      } finally {
        await bridge.close();
        await other.close();
      }
    } finally {
      tx.close();
      await source?.close();
      await server.close();
    }
    // journaled: a service restarted on the journal has the run, complete, with every point
    const again = await startServer({ plan, baselinePath, journalPath: join(dir, 'uni.sqlite'), port: 0, inProcessCompute: true });
    try {
      expect(again.service.detail('A1', 'usv-9')?.run).toMatchObject({ status: 'complete', points: TIMES.length });
    } finally {
      await again.close();
    }
  });

  it('multicast: joins the group given as the listen address, on the loopback interface', async () => {
    const server = await startServer({ plan, journalPath: join(dir, 'mc.sqlite'), port: 0 });
    const group = '239.255.42.77';
    const tx = createSocket('udp4');
    await new Promise<void>((res) => tx.bind(0, '127.0.0.1', () => res()));
    tx.setMulticastInterface('127.0.0.1');
    tx.setMulticastLoopback(true);
    let source: RunningDisSource | undefined;
    try {
      source = await startServiceDisSource({ server, plan, config: { ...sources.dis!, listen: `udp://${group}:0`, interface: '127.0.0.1', silence: 1.5 } });
      expect(source.address.address).toBe('0.0.0.0');
      await sendAll(tx, source.address.port, group, TIMES.slice(0, 8).map((t) => openDisPdu(t, 7)));
      await until(() => server.service.detail('A1', 'usv-9')?.run.status === 'complete');
      const detail = server.service.detail('A1', 'usv-9');
      expect(detail?.run, JSON.stringify(source.counters())).toMatchObject({ status: 'complete', points: 8 });
      expect(Math.abs(detail!.raw.values[0][7] - pathRange(TIMES[7]))).toBeLessThan(1e-3);
    } finally {
      tx.close();
      await source?.close();
      await server.close();
    }
  });

  it('without a plan file, the mapping is checked against the plan in the journal', async () => {
    const journalPath = join(dir, 'noplan.sqlite');
    await (await startServer({ plan, journalPath, port: 0 })).close(); // the journal records the plan
    const server = await startServer({ journalPath, port: 0 });
    try {
      const bad = { ...sources.dis!, entities: [{ ...sources.dis!.entities[0], vignette: 'Z9' }] };
      await expect(startServeDis(server, undefined, { config: bad, origin: 'map.json' }, () => undefined)).rejects.toMatchObject({ code: 'MAPPING_PLAN', issues: ['entities.0.vignette: "Z9" is not a vignette of the plan'] });
      const source = await startServeDis(server, undefined, { config: sources.dis!, origin: 'map.json' }, () => undefined);
      expect(source.address.port).toBeGreaterThan(0);
      // registered with the server as one of its sources: /healthz shows its counters
      const health = (await (await fetch(`${server.url}/healthz`)).json()) as { sources: Array<{ name: string; counters: Record<string, unknown> }> };
      expect(health.sources).toEqual([{ name: 'dis', counters: JSON.parse(JSON.stringify(source.counters())) }]);
      expect(health.sources[0].counters).toMatchObject({ datagrams: 0, points: 0, runsOpened: 0 });
      // the settings it started with are in the event log (the plan stored in the journal has no DIS block)
      await until(() => server.service.snapshot().log.some((e) => e.author === 'dis source'));
      const note = server.service.snapshot().log.find((e) => e.author === 'dis source');
      expect(note?.text).toContain(`listening on ${sources.dis!.listen}`);
      expect(note?.text).toContain('→ A1/usv-9');
      await source.close();
    } finally {
      await server.close();
    }
  });

  it('a stalled process does not close a run whose PDUs are waiting in the socket buffer', async () => {
    const server = await startServer({ plan, journalPath: join(dir, 'stall.sqlite'), port: 0 });
    const tx = createSocket('udp4');
    let source: RunningDisSource | undefined;
    try {
      source = await startServiceDisSource({ server, plan, config: { ...sources.dis!, silence: 0.3 } });
      await sendAll(tx, source.address.port, '127.0.0.1', [openDisPdu(0, 7)]);
      await until(() => source!.counters().points === 1);
      // block the loop, as soon as the second PDU is sent, for longer than the silence: the PDU
      // waits in the socket buffer while the silence timer falls due
      await new Promise<void>((res, rej) =>
        tx.send(openDisPdu(0.5, 7), source!.address.port, '127.0.0.1', (e) => {
          const end = performance.now() + 800;
          while (performance.now() < end);
          return e ? rej(e) : res();
        }),
      );
      await until(() => source!.counters().runsClosed === 1);
      expect(source.counters()).toMatchObject({ datagrams: 2, points: 2, runsOpened: 1, runsClosed: 1 });
    } finally {
      tx.close();
      await source?.close();
      await server.close();
    }
  });

  it('a flood of bad datagrams is counted by code and logged a few lines at a time, and the source keeps going', async () => {
    const server = await startServer({ plan, journalPath: join(dir, 'flood.sqlite'), port: 0 });
    const events: string[] = [];
    const tx = createSocket('udp4');
    let source: RunningDisSource | undefined;
    try {
      // a long notice interval: within the test, one full line per code, the rest held back and counted
      source = await startServiceDisSource({ server, plan, config: { ...sources.dis!, silence: 30 }, onEvent: (l) => events.push(l), noticeIntervalMs: 60_000 });
      const good = openDisPdu(0, 7);
      const truncated = good.subarray(0, 100);
      const badVersion = good.slice();
      badVersion[0] = 99;
      const flood: Uint8Array[] = [];
      for (let k = 0; k < 200; k++) flood.push(new Uint8Array([1, 2, 3]), truncated, badVersion, openDisPdu(0, 7, 1000 + k));
      await sendAll(tx, source.address.port, '127.0.0.1', [good, ...flood, ...TIMES.slice(1, 6).map((t) => openDisPdu(t, 6))]);
      await until(() => (server.service.detail('A1', 'usv-9')?.run.points ?? 0) >= 6 && source!.counters().datagrams >= 806);
      const c = source.counters();
      expect(c.datagrams).toBe(806);
      expect(c.bad).toEqual({ PDU_SHORT_HEADER: 200, PDU_TRUNCATED: 200, PDU_VERSION: 200 });
      expect(c.unmapped).toBe(200);
      expect(c.points).toBe(6);
      expect(server.service.detail('A1', 'usv-9')?.run.points).toBe(6);
      const noticeLines = events.filter((l) => l.startsWith('DIS: '));
      expect(noticeLines).toHaveLength(4); // one per code
      await source.close();
      const held = events.filter((l) => /^DIS: \d+ more not logged/.test(l));
      expect(held).toHaveLength(1);
      expect(held[0]).toMatch(/^DIS: 796 more not logged in the last [\d.]+ s: /);
      for (const code of ['PDU_SHORT_HEADER 199', 'PDU_TRUNCATED 199', 'PDU_VERSION 199', 'UNMAPPED_ENTITY 199']) expect(held[0]).toContain(code);
    } finally {
      tx.close();
      await source?.close();
      await server.close();
    }
  });
});
