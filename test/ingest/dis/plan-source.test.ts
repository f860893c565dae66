/**
 * The plan's `sources.dis` block and the options of `serve --dis`: validation with clear, located
 * errors, and the plan's JSON Schema (`plumbline schema plan`) checked with an independent JSON
 * Schema validator (npm `ajv` 8.20.0, draft 2020-12, the dialect zod 4 writes).
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Ajv2020 from 'ajv/dist/2020.js';
import { afterAll, describe, expect, it } from 'vitest';
import { StallFreeClock } from '../../../ingest/dis/bridge.js';
import { CountedLog } from '../../../ingest/dis/counted-log.js';
import { listenTarget } from '../../../ingest/dis/listen.js';
import { serveDisConfig } from '../../../ingest/cli/serve-dis.js';
import { InputError } from '../../../ingest/errors.js';
import { parsePlanWithSources, planJsonSchema } from '../../../ingest/plan.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-dis-plan-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const BASE = {
  name: 'sources (invented)',
  channels: [
    { name: 'range', unit: 'm' },
    { name: 'bearing', unit: 'deg', period: 360 },
  ],
  vignettes: [{ id: 'B2', horizon: 300 }],
};
const DIS = {
  listen: 'udp://0.0.0.0:3000',
  sites: { jetty: { lat: 3.25, lon: -71.5, height: 6 } },
  entities: [{ site: 1, application: 1, entity: 42, vignette: 'B2', track: 'usv-42', sensor: 'jetty' }],
};
const withDis = (dis: Record<string, unknown>) => JSON.stringify({ ...BASE, sources: { dis } });

function issuesOf(text: string): string[] {
  try {
    parsePlanWithSources(text, 'plan.json');
  } catch (e) {
    if (e instanceof InputError && e.code === 'PLAN_INVALID') return [...e.issues];
    throw e;
  }
  throw new Error('the plan was accepted');
}

describe('plan sources.dis', () => {
  it('takes the defaults: silence 10 s, range-bearing, live', () => {
    const { sources } = parsePlanWithSources(withDis(DIS), 'plan.json');
    expect(sources.dis).toMatchObject({ listen: 'udp://0.0.0.0:3000', silence: 10, entities: [{ conversion: 'range-bearing', source: 'live' }] });
  });
  it('says what is wrong and where', () => {
    expect(issuesOf(withDis({ ...DIS, listen: 'tcp://0.0.0.0:3000' }))).toEqual(['sources.dis.listen: listen must look like udp://HOST:PORT, got "tcp://0.0.0.0:3000"']);
    expect(issuesOf(withDis({ ...DIS, silence: 0 }))).toEqual(['sources.dis.silence: must be > 0 seconds']);
    expect(issuesOf(withDis({ ...DIS, interface: '127.0.0.1' }))).toEqual(['sources.dis.interface: goes with a multicast group address in "listen"']);
    expect(issuesOf(withDis({ ...DIS, entities: [{ ...DIS.entities[0], sensor: 'pier' }] }))).toEqual(['sources.dis.entities[0].sensor: unknown site "pier"']);
    expect(issuesOf(withDis({ ...DIS, port: 3000 }))[0]).toMatch(/^sources\.dis: Unrecognized key: "port"/);
  });
  it('checks the mapping against the plan: vignettes and the quantities of the channels', () => {
    expect(issuesOf(withDis({ ...DIS, entities: [{ ...DIS.entities[0], vignette: 'B9' }] }))).toEqual(['sources.dis.entities[0].vignette: "B9" is not a vignette of the plan']);
    expect(issuesOf(withDis({ ...DIS, entities: [{ ...DIS.entities[0], conversion: 'enu' }] }))).toEqual([
      'sources.dis.entities[0]: plan channel "range" needs quantity "range", which conversion "enu" does not give (east, north, up)',
      'sources.dis.entities[0]: plan channel "bearing" needs quantity "bearing", which conversion "enu" does not give (east, north, up)',
    ]);
  });
});

describe('the README', () => {
  it('its sources.dis example is a valid block', () => {
    const block = /```json\n("sources": \{[\s\S]*?\n\})\n```/.exec(readFileSync('README.md', 'utf8'));
    expect(block).not.toBeNull();
    const doc = JSON.parse(`{${block![1]}}`) as { sources: unknown };
    const { sources } = parsePlanWithSources(JSON.stringify({ ...BASE, vignettes: [{ id: 'S1-L1', horizon: 60 }], sources: doc.sources }), 'README.md');
    expect(sources.dis).toMatchObject({ listen: 'udp://239.1.2.3:3000', interface: '192.0.2.10', silence: 10 });
  });
});

describe('JSON Schema of the plan (ajv 8.20.0, draft 2020-12)', () => {
  const ajv = new Ajv2020.default({ strict: false, allErrors: true });
  const validate = ajv.compile(planJsonSchema());
  it('is a valid schema that accepts a plan with a sources.dis block', () => {
    expect(validate(JSON.parse(withDis(DIS))), JSON.stringify(validate.errors)).toBe(true);
    expect(validate(JSON.parse(withDis({ ...DIS, listen: 'udp://239.1.2.3:3000', interface: '10.0.0.5', silence: 4, channels: { range: 'range', bearing: 'bearing' } })))).toBe(true);
  });
  it('refuses what the plan parser refuses for its shape', () => {
    expect(validate(JSON.parse(withDis({ ...DIS, port: 3000 })))).toBe(false);
    expect(validate(JSON.parse(withDis({ ...DIS, silence: -1 })))).toBe(false);
    expect(validate(JSON.parse(withDis({ ...DIS, entities: [{ ...DIS.entities[0], conversion: 'polar' }] })))).toBe(false);
    expect(validate(JSON.parse(JSON.stringify({ ...BASE, sources: { udp: {} } })))).toBe(false);
  });
});

describe('serve --dis options', () => {
  const { sources } = parsePlanWithSources(withDis(DIS), 'plan.json');
  it('--dis overrides the plan\'s listen address; a multicast address is the group', async () => {
    expect((await serveDisConfig({ dis: 'udp://239.9.9.9:3001', sources }))?.config).toMatchObject({ listen: 'udp://239.9.9.9:3001', silence: 10 });
    expect(listenTarget('udp://239.9.9.9:3001')).toEqual({ host: '0.0.0.0', port: 3001, group: '239.9.9.9' });
    expect(listenTarget('udp://[ff15::7]:3001', '::1')).toEqual({ host: '::1', port: 3001, group: 'ff15::7' });
    expect(listenTarget('udp://127.0.0.1:3001')).toEqual({ host: '127.0.0.1', port: 3001 });
    expect(await serveDisConfig({ sources: {} })).toBeUndefined();
  });
  it('refuses --dis without a mapping, a bad --dis, and --dis-map without an address', async () => {
    await expect(serveDisConfig({ dis: 'udp://127.0.0.1:3000', sources: {} })).rejects.toThrow(/--dis needs the entity mapping: a plan with a sources\.dis block, or --dis-map FILE/);
    await expect(serveDisConfig({ dis: 'udp://127.0.0.1', sources })).rejects.toThrow(/--dis must look like udp:\/\/HOST:PORT/);
    await expect(serveDisConfig({ map: 'map.json', sources: {} })).rejects.toThrow(/--dis-map goes with --dis/);
  });
  it('takes the mapping from --dis-map', async () => {
    const map = join(dir, 'map.json');
    writeFileSync(map, JSON.stringify({ sites: DIS.sites, entities: DIS.entities }));
    const c = await serveDisConfig({ dis: 'udp://127.0.0.1:3002', map, sources: {} });
    expect(c?.config).toMatchObject({ listen: 'udp://127.0.0.1:3002', silence: 10, entities: [{ track: 'usv-42' }] });
    expect(c?.origin).toBe(map);
  });
});

describe('CountedLog', () => {
  it('logs the first event of each code per interval and counts the rest into one line per flush', () => {
    const lines: string[] = [];
    let now = 0;
    const log = new CountedLog((l) => lines.push(l), 'DIS', 1000, () => now);
    for (let k = 0; k < 1000; k++) log.note('A', () => `a${k}`);
    log.note('B', () => 'b0');
    now = 500;
    log.note('B', () => 'b1');
    log.flush();
    expect(lines).toEqual(['DIS: A: a0', 'DIS: B: b0', 'DIS: 1000 more not logged in the last 0.5 s: A 999, B 1']);
    log.flush();
    expect(lines).toHaveLength(3); // nothing held back: no line
    now = 1000;
    log.note('A', () => 'again');
    expect(lines.at(-1)).toBe('DIS: A: again');
  });
});

describe('StallFreeClock', () => {
  it('counts a tick that comes more than one period late as stalled time, and on-time ticks not at all', () => {
    let wall = 1000;
    const clock = new StallFreeClock(100, () => wall);
    for (let k = 0; k < 5; k++) {
      wall += 100;
      clock.tick();
    }
    expect(clock.now()).toBe(1500);
    wall += 150; // late by half a period: jitter, not a stall
    clock.tick();
    expect(clock.now()).toBe(1650);
    wall += 900; // late by 800 ms
    clock.tick();
    expect(clock.now()).toBe(2550 - 800);
    wall += 100;
    expect(clock.now()).toBe(2650 - 800);
  });
});
