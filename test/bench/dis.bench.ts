/**
 * DIS decode benchmark: `npm run bench:dis`. Prints figures; asserts nothing about time.
 *
 * On one core (this process, no workers), over 200,000 Entity State PDUs (versions 6 and 7 mixed,
 * 0–2 variable-parameter records, written byte by byte from the field table):
 *   1. decodeEntityStatePdu alone: PDUs decoded per second;
 *   2. decode + range/bearing from a site (geodesy.ts);
 *   3. the bridge's router without I/O (datagram → mapping → track clock → channels → sink).
 * Each pass checks its answer (a checksum of the decoded locations, the number of points) and
 * refuses to print a rate for a wrong one.
 */
import { performance } from 'node:perf_hooks';
import { EntityRouter } from '../../ingest/dis/bridge.js';
import { geodeticToEcef, LocalFrame } from '../../ingest/dis/geodesy.js';
import { decodeEntityStatePdu } from '../../ingest/dis/pdu.js';
import { encodeTimestamp } from '../../ingest/dis/time.js';
import { parsePlan } from '../../ingest/plan.js';

const N = 200_000;
const ROUNDS = 5;
const site = { lat: 1.5, lon: 2.5, height: 10 }; // invented
const [x0, y0, z0] = geodeticToEcef(site);

function pdu(k: number): Uint8Array {
  const n = k % 3;
  const bytes = new Uint8Array(144 + 16 * n);
  const dv = new DataView(bytes.buffer);
  dv.setUint8(0, k % 2 === 0 ? 6 : 7);
  dv.setUint8(1, 1);
  dv.setUint8(2, 1);
  dv.setUint8(3, 1);
  dv.setUint32(4, encodeTimestamp(k * 0.05, true));
  dv.setUint16(8, bytes.length);
  dv.setUint16(12, 1);
  dv.setUint16(14, 1);
  dv.setUint16(16, 1 + (k % 10));
  dv.setUint8(19, n);
  dv.setFloat64(48, x0 + (k % 1000));
  dv.setFloat64(56, y0 + 500);
  dv.setFloat64(64, z0);
  return bytes;
}

const pdus = Array.from({ length: N }, (_, k) => pdu(k));
let expectedSum = 0;
for (let k = 0; k < N; k++) expectedSum += k % 1000;

function rate(label: string, pass: () => boolean): void {
  let best = Number.POSITIVE_INFINITY;
  for (let r = 0; r < ROUNDS; r++) {
    const t0 = performance.now();
    const ok = pass();
    const ms = performance.now() - t0;
    if (!ok) {
      console.log(`${label}: WRONG ANSWER, no figure`);
      process.exitCode = 1;
      return;
    }
    best = Math.min(best, ms);
  }
  console.log(`${label}: ${Math.round((N / best) * 1000).toLocaleString('en-US')} PDUs/s (best of ${ROUNDS} passes over ${N.toLocaleString('en-US')} PDUs, ${best.toFixed(1)} ms)`);
}

console.log(`DIS benchmark, Node ${process.version}, one core`);
rate('decode', () => {
  let sum = 0;
  for (const b of pdus) sum += decodeEntityStatePdu(b).location[0] - x0;
  return Math.abs(sum - expectedSum) < 1e-3;
});
const frame = new LocalFrame(site);
rate('decode + range/bearing', () => {
  let sum = 0;
  for (const b of pdus) {
    const [x, y, z] = decodeEntityStatePdu(b).location;
    sum += frame.rangeBearing(x, y, z).range;
  }
  return Number.isFinite(sum) && sum > 500 * N;
});
const plan = parsePlan(JSON.stringify({ name: 'bench', channels: [{ name: 'range', unit: 'm' }, { name: 'bearing', unit: 'deg', period: 360 }], vignettes: [{ id: 'V', horizon: 1e6 }] }), 'plan.json');
const entries = Array.from({ length: 10 }, (_, i) => ({ site: 1, application: 1, entity: i + 1, vignette: 'V', track: `e${i + 1}`, source: 'live' as const, sensor: 's', conversion: 'range-bearing' as const, siteLocation: site, quantities: ['range', 'bearing'] as const }));
rate('router (decode, map, clock, convert)', () => {
  let points = 0;
  const router = new EntityRouter(plan, entries, { open: () => undefined, point: () => void points++, close: () => undefined }, 1e9);
  pdus.forEach((b, k) => router.datagram(b, k * 0.05));
  return points === N;
});
