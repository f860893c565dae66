/**
 * The DIS bridge: the mapping file against the plan, the router without I/O (silence, horizon,
 * exercise filter, reappearance), and end to end over loopback: the real service in-process
 * (port 0), the bridge on a loopback UDP port, and Entity State PDUs of an invented entity on a
 * known path. The path is a spiral in the sensor site's horizontal plane, range 1000 + 20t m and
 * bearing 30 + 3t degrees, placed in geocentric coordinates with the transpose of the EPSG 9836
 * rotation (written out here), so the expected channel values are known analytically.
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { createSocket } from 'node:dgram';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { closedLine, EntityRouter, parseListen, startDisSource, type DisSourceOptions, type RunSink } from '../../../ingest/dis/bridge.js';
import { FeedClient } from '../../../ingest/dis/feed-client.js';
import { DisMappingError, parseDisMapping, resolveMapping, type DisMappingDocument } from '../../../ingest/dis/mapping.js';
import { decodeEntityStatePdu } from '../../../ingest/dis/pdu.js';
import { encodeTimestamp } from '../../../ingest/dis/time.js';
import { enuToEcef as enuAtSite } from './enu.js';
import { loadPlan, parsePlan } from '../../../ingest/plan.js';
import { startServer } from '../../../ingest/service/server.js';
import { handBuiltPdu } from './hand-built.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-dis-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const PLAN = {
  name: 'DIS bridge test (invented)',
  channels: [
    { name: 'range', unit: 'm' },
    { name: 'bearing', unit: 'deg', period: 360 },
  ],
  vignettes: [{ id: 'V1', horizon: 60 }, { id: 'V2', horizon: 5 }],
};
// An invented sensor site (no real place intended).
const SITE = { lat: 12.5, lon: -33.25, height: 18 };
const MAPPING: DisMappingDocument = {
  sites: { 'mast-a': SITE },
  entities: [
    { site: 10, application: 20, entity: 7, vignette: 'V1', track: 'usv-7', sensor: 'mast-a' },
    { exercise: 3, site: 10, application: 20, entity: 8, vignette: 'V2', track: 'usv-8', sensor: 'mast-a', conversion: 'range-bearing' },
  ],
};
const plan = parsePlan(JSON.stringify(PLAN), 'plan.json');
const entries = resolveMapping(parseDisMapping(JSON.stringify(MAPPING), 'map.json'), plan);

const enuAt = (e: number, n: number, u: number) => enuAtSite(SITE, e, n, u);
const pathRange = (t: number) => 1000 + 20 * t;
const pathBearing = (t: number) => 30 + 3 * t;
function pathPdu(t: number, startPastHour: number, version: 6 | 7, entity = 7, exercise = 1): Uint8Array {
  const b = (pathBearing(t) * Math.PI) / 180;
  const location = enuAt(pathRange(t) * Math.sin(b), pathRange(t) * Math.cos(b), 0);
  return handBuiltPdu({ version, exercise, site: 10, application: 20, entity, timestamp: encodeTimestamp(startPastHour + t, true), location, marking: 'USV7' });
}

describe('mapping file', () => {
  it('refuses an unknown site, a duplicate entity, an unknown vignette and a channel the conversion cannot fill', () => {
    try {
      parseDisMapping(JSON.stringify({ ...MAPPING, entities: [{ ...MAPPING.entities[0], sensor: 'nowhere' }] }), 'm.json');
      throw new Error('accepted');
    } catch (e) {
      expect((e as DisMappingError).issues).toEqual(['entities.0.sensor: unknown site "nowhere"']);
    }
    try {
      parseDisMapping(JSON.stringify({ ...MAPPING, entities: [MAPPING.entities[0], MAPPING.entities[0]] }), 'm.json');
      throw new Error('accepted');
    } catch (e) {
      expect((e as DisMappingError).code).toBe('MAPPING_INVALID');
      expect((e as DisMappingError).issues.join('\n')).toMatch(/mapped twice/);
    }
    const bad = parseDisMapping(JSON.stringify({ ...MAPPING, entities: [{ ...MAPPING.entities[0], vignette: 'V9', conversion: 'enu' }] }), 'm.json');
    try {
      resolveMapping(bad, plan);
      throw new Error('accepted');
    } catch (e) {
      expect((e as DisMappingError).code).toBe('MAPPING_PLAN');
      const text = (e as DisMappingError).issues.join('\n');
      expect(text).toMatch(/"V9" is not a vignette/);
      expect(text).toMatch(/needs quantity "range", which conversion "enu" does not give/);
    }
  });
  it('maps plan channels to ENU quantities by name', () => {
    const enuPlan = parsePlan(JSON.stringify({ ...PLAN, channels: [{ name: 'x', unit: 'm' }, { name: 'y', unit: 'm' }] }), 'p.json');
    const m = parseDisMapping(JSON.stringify({ ...MAPPING, channels: { x: 'east', y: 'north' }, entities: [{ ...MAPPING.entities[0], conversion: 'enu' }] }), 'm.json');
    expect(resolveMapping(m, enuPlan)[0].quantities).toEqual(['east', 'north']);
  });
  it('the example mapping of the README is valid', () => {
    const readme = readFileSync('README.md', 'utf8');
    const block = /The mapping file \(JSON[\s\S]*?```json\n([\s\S]*?)\n```/.exec(readme);
    expect(block).not.toBeNull();
    const m = parseDisMapping(block![1], 'README.md');
    expect(m.entities[0]).toMatchObject({ site: 10, application: 20, entity: 7, conversion: 'range-bearing', source: 'live' });
  });
  it('parses udp://HOST:PORT', () => {
    expect(parseListen('udp://0.0.0.0:3000')).toEqual({ host: '0.0.0.0', port: 3000 });
    expect(parseListen('udp://[::1]:3001')).toEqual({ host: '::1', port: 3001 });
    expect(() => parseListen('tcp://1.2.3.4:5')).toThrow(/udp:\/\/HOST:PORT/);
  });
});

describe('router (no I/O)', () => {
  function recorder(): { sink: RunSink; log: string[]; points: Array<[string, number, number[]]> } {
    const log: string[] = [];
    const points: Array<[string, number, number[]]> = [];
    return {
      log,
      points,
      sink: {
        open: (v, t) => log.push(`open ${v}/${t}`),
        point: (v, t, time, values) => points.push([`${v}/${t}`, time, values]),
        close: (v, t, why) => log.push(`close ${v}/${t} ${why}`),
      },
    };
  }

  it('converts to the plan channels, closes after the silence, and starts -r2 when the entity reappears', () => {
    const r = recorder();
    const router = new EntityRouter(plan, entries, r.sink, 1000);
    for (let k = 0; k < 5; k++) router.datagram(pathPdu(k, 100, 7), k * 1000);
    expect(r.points.map((p) => p[1])).toEqual([0, 1, 2, 3, 4].map((t) => expect.closeTo(t, 5)));
    // values against the path at the nominal send times k (the track time carries the 1.7 µs
    // quantization of the timestamp; the position does not)
    r.points.forEach(([, , [range, bearing]], k) => {
      expect(Math.abs(range - pathRange(k))).toBeLessThan(1e-6);
      expect(Math.abs(bearing - pathBearing(k))).toBeLessThan(1e-9);
    });
    router.silent(4900);
    expect(r.log).toEqual(['open V1/usv-7']);
    router.silent(5001);
    expect(r.log).toEqual(['open V1/usv-7', 'close V1/usv-7 silence']);
    router.datagram(pathPdu(50, 100, 6), 60_000);
    expect(r.log.at(-1)).toBe('open V1/usv-7-r2');
    expect(r.points.at(-1)?.[1]).toBe(0);
  });

  it('closes a run at the first PDU past the horizon and ignores the entity until it is silent', () => {
    const r = recorder();
    const router = new EntityRouter(plan, entries, r.sink, 1000);
    for (let k = 0; k <= 8; k++) router.datagram(pathPdu(k, 0, 7, 8, 3), k * 100);
    expect(r.points.length).toBe(6); // t = 0..5 (horizon 5 s)
    expect(r.log).toEqual(['open V2/usv-8', 'close V2/usv-8 horizon']);
    expect(router.stats.pastHorizon).toBe(3);
  });

  it('an entry for the PDU\'s exercise wins over one for any exercise', () => {
    const r = recorder();
    const m = parseDisMapping(JSON.stringify({ sites: MAPPING.sites, entities: [
      { site: 10, application: 20, entity: 7, vignette: 'V1', track: 'any', sensor: 'mast-a' },
      { exercise: 5, site: 10, application: 20, entity: 7, vignette: 'V2', track: 'five', sensor: 'mast-a' },
    ] }), 'm.json');
    const router = new EntityRouter(plan, resolveMapping(m, plan), r.sink, 1000);
    router.datagram(pathPdu(0, 0, 7, 7, 5), 0);
    router.datagram(pathPdu(0, 0, 7, 7, 6), 0);
    expect(r.log).toEqual(['open V2/five', 'open V1/any']);
  });

  it('filters by exercise and counts unmapped entities, bad PDUs and late stamps', () => {
    const r = recorder();
    const router = new EntityRouter(plan, entries, r.sink, 1000);
    router.datagram(pathPdu(0, 0, 7, 8, 4), 0); // entity 8 is mapped in exercise 3 only
    router.datagram(pathPdu(0, 0, 7, 99), 0);
    router.datagram(new Uint8Array([7, 1, 1]), 0);
    router.datagram(pathPdu(1, 0, 7), 10);
    router.datagram(pathPdu(0.5, 0, 7), 20);
    expect(router.stats).toMatchObject({ datagrams: 5, unmapped: 2, notAfter: 1, points: 1, bad: { PDU_SHORT_HEADER: 1 } });
  });
});

/** The bridge as `plumbline dis-bridge` wires it: the WebSocket feed client as the output. */
async function startDisBridge(o: Omit<DisSourceOptions, 'output'> & { url: string }) {
  const feed = new FeedClient({ url: o.url, channels: o.plan.channels.map((c) => c.name), onEvent: o.onEvent, onClosed: (v, t, already) => o.onEvent?.(closedLine(v, t, already)) });
  await feed.connect();
  const source = await startDisSource({ ...o, output: feed });
  return { ...source, feed };
}

describe('end to end over loopback', () => {
  it('PDUs of an entity on a known path reach the service as a run with the right range and bearing, closed after the silence', async () => {
    const planPath = join(dir, 'plan.json');
    writeFileSync(planPath, JSON.stringify(PLAN));
    const server = await startServer({ planPath, journalPath: join(dir, 'e2e.sqlite'), port: 0 });
    const events: string[] = [];
    const bridge = await startDisBridge({
      host: '127.0.0.1',
      port: 0,
      url: `${server.url.replace('http', 'ws')}/feed`,
      plan: await loadPlan(planPath),
      entries,
      silence: 0.6,
      onEvent: (line) => events.push(line),
    });
    const tx = createSocket('udp4');
    const send = (bytes: Uint8Array) => new Promise<void>((res, rej) => tx.send(bytes, bridge.address.port, '127.0.0.1', (e) => (e ? rej(e) : res())));
    try {
      // 41 PDUs, 0.25 s apart in PDU time, alternating versions 6 and 7; the run starts 5 s before
      // the top of the hour, so the timestamps roll over in the middle of the run.
      const times = Array.from({ length: 41 }, (_, k) => k * 0.25);
      for (const [k, t] of times.entries()) {
        await send(pathPdu(t, 3595, k % 2 === 0 ? 7 : 6));
        if (k === 10) {
          await send(new Uint8Array([1, 2, 3, 4, 5])); // junk
          await send(pathPdu(t, 3595, 7).subarray(0, 100)); // truncated
          await send(pathPdu(t, 3595, 7, 99)); // unmapped entity
        }
        await new Promise((r) => setTimeout(r, 3));
      }
      const until = Date.now() + 15_000;
      let detail = server.service.detail('V1', 'usv-7');
      // the service has the run complete, and the bridge has its close confirmed
      while (Date.now() < until && (detail?.run.status !== 'complete' || !events.includes('run V1/usv-7 closed'))) {
        await new Promise((r) => setTimeout(r, 50));
        detail = server.service.detail('V1', 'usv-7');
      }
      expect(detail?.run.status).toBe('complete');
      const raw = detail?.raw as { t: number[]; values: number[][] };
      expect(raw.t.length).toBe(times.length);
      raw.t.forEach((t, i) => {
        expect(Math.abs(t - times[i])).toBeLessThan(1e-5); // one timestamp unit is 1.7 µs
        // range and bearing against the path at the nominal time (positions are exact float64)
        expect(Math.abs(raw.values[0][i] - pathRange(times[i]))).toBeLessThan(1e-3);
        expect(Math.abs(raw.values[1][i] - pathBearing(times[i]))).toBeLessThan(1e-6);
      });
      expect(bridge.stats.bad).toEqual({ PDU_SHORT_HEADER: 1, PDU_TRUNCATED: 1 });
      expect(bridge.stats.unmapped).toBe(1);
      expect(bridge.stats.runsClosed).toBe(1);
      expect(events).toContain('run V1/usv-7 closed');
      expect(decodeEntityStatePdu(pathPdu(0, 0, 7)).marking.text).toBe('USV7');
    } finally {
      tx.close();
      await bridge.close();
      await server.close();
    }
  });

  it('joins a multicast group (on the loopback interface) and receives PDUs sent to the group', async () => {
    const planPath = join(dir, 'plan.json');
    writeFileSync(planPath, JSON.stringify(PLAN));
    const server = await startServer({ planPath, journalPath: join(dir, 'mc.sqlite'), port: 0 });
    const group = '239.255.42.99';
    const bridge = await startDisBridge({ host: '127.0.0.1', port: 0, group, url: `${server.url.replace('http', 'ws')}/feed`, plan, entries, silence: 0.4 });
    const tx = createSocket('udp4');
    await new Promise<void>((res) => tx.bind(0, '127.0.0.1', () => res()));
    tx.setMulticastInterface('127.0.0.1');
    tx.setMulticastLoopback(true);
    try {
      for (let k = 0; k < 5; k++) {
        await new Promise<void>((res, rej) => tx.send(pathPdu(k, 0, 7), bridge.address.port, group, (e) => (e ? rej(e) : res())));
        await new Promise((r) => setTimeout(r, 3));
      }
      const until = Date.now() + 10_000;
      while (Date.now() < until && server.service.detail('V1', 'usv-7')?.run.status !== 'complete') await new Promise((r) => setTimeout(r, 50));
      const detail = server.service.detail('V1', 'usv-7');
      expect(detail?.run.status).toBe('complete');
      expect(detail?.raw.t.length).toBe(5);
      expect(Math.abs((detail?.raw.values[0][4] ?? 0) - pathRange(4))).toBeLessThan(1e-3);
    } finally {
      tx.close();
      await bridge.close();
      await server.close();
    }
  });

  it('a service restart mid-run loses nothing: the bridge reconnects and resends from the committed point', async () => {
    const planPath = join(dir, 'plan.json');
    writeFileSync(planPath, JSON.stringify(PLAN));
    const journalPath = join(dir, 'restart.sqlite');
    let server = await startServer({ planPath, journalPath, port: 0 });
    const port = Number(new URL(server.url).port);
    const bridge = await startDisBridge({ host: '127.0.0.1', port: 0, url: `ws://127.0.0.1:${port}/feed`, plan, entries, silence: 5 });
    const tx = createSocket('udp4');
    const send = (k: number) => new Promise<void>((res, rej) => tx.send(pathPdu(k * 0.5, 0, 7), bridge.address.port, '127.0.0.1', (e) => (e ? rej(e) : res())));
    const waitPoints = async (n: number) => {
      const until = Date.now() + 15_000;
      while (Date.now() < until && (server.service.detail('V1', 'usv-7')?.run.points ?? 0) < n) await new Promise((r) => setTimeout(r, 50));
      return server.service.detail('V1', 'usv-7')?.run.points;
    };
    try {
      for (let k = 0; k < 10; k++) await send(k);
      expect(await waitPoints(10)).toBe(10);
      await server.close();
      for (let k = 10; k < 20; k++) await send(k); // buffered by the bridge while the service is down
      server = await startServer({ planPath, journalPath, port });
      expect(await waitPoints(20)).toBe(20);
      expect(bridge.feed.reconnects).toBeGreaterThanOrEqual(1);
      const raw = server.service.detail('V1', 'usv-7')?.raw as { t: number[] };
      expect(raw.t.map((t) => Math.round(t * 2))).toEqual(Array.from({ length: 20 }, (_, k) => k));
    } finally {
      tx.close();
      await bridge.close();
      await server.close();
    }
  });
});
