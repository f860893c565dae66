/**
 * WGS 84 conversions against published worked examples. Sources:
 *  - IOGP/EPSG Guidance Note 7-2 (Coordinate Conversions and Transformations including Formulas),
 *    §4.1.1 worked example of EPSG method 9602 (geographic ↔ geocentric, WGS 84), §4.1.2 worked
 *    examples of EPSG methods 9836 (geocentric → topocentric) and 9837 (geographic → topocentric).
 *    The example values below are quoted from memory.
 *  - NIMA TR8350.2 (3rd ed.) Table 3.3: semi-minor axis b = 6356752.3142 m (quoted from memory).
 * Tolerances: the published values carry 3 decimals (mm); we allow 1 mm unless said otherwise.
 */
import { describe, expect, it } from 'vitest';
import { ecefToGeodetic, geodeticToEcef, LocalFrame, WGS84_B, WGS84_E2 } from '../../../ingest/dis/geodesy.js';

const dms = (d: number, m: number, s: number) => d + m / 60 + s / 3600;
function close(actual: number, expected: number, tol: number, what: string): void {
  const diff = Math.abs(actual - expected);
  if (!(diff <= tol)) throw new Error(`${what}: actual ${actual}, expected ${expected}, difference ${diff}, tolerance ${tol}`);
}

// EPSG GN 7-2 §4.1.1 (method 9602), WGS 84: φ = 53°48'33.820"N, λ = 2°07'46.380"E, h = 73.000 m
const EX_GEOGRAPHIC = { lat: dms(53, 48, 33.82), lon: dms(2, 7, 46.38), height: 73 };
const EX_GEOCENTRIC: [number, number, number] = [3771793.968, 140253.342, 5124304.349];
// EPSG GN 7-2 §4.1.2, topocentric origin φ0 = 55°00'00"N, λ0 = 5°00'00"E, h0 = 200 m (WGS 84)
const EX_ORIGIN = { lat: 55, lon: 5, height: 200 };
const EX_ORIGIN_GEOCENTRIC: [number, number, number] = [3652755.3058, 319574.6799, 5201547.3536];
const EX_TOPOCENTRIC: [number, number, number] = [-189013.869, -128642.04, -4220.171];

describe('EPSG Guidance Note 7-2, method 9602 (geographic ↔ geocentric)', () => {
  it('forward: the worked example to 1 mm', () => {
    const got = geodeticToEcef(EX_GEOGRAPHIC);
    'XYZ'.split('').forEach((axis, i) => close(got[i], EX_GEOCENTRIC[i], 1e-3, axis));
  });
  it('reverse: the worked example back to the published latitude, longitude (1e-8°, under 1 mm) and height (1 mm)', () => {
    const got = ecefToGeodetic(...EX_GEOCENTRIC);
    close(got.lat, EX_GEOGRAPHIC.lat, 1e-8, 'latitude');
    close(got.lon, EX_GEOGRAPHIC.lon, 1e-8, 'longitude');
    close(got.height, EX_GEOGRAPHIC.height, 1e-3, 'height');
  });
  it('the topocentric origin of §4.1.2 in geocentric coordinates (published to 0.1 mm)', () => {
    const got = geodeticToEcef(EX_ORIGIN);
    'XYZ'.split('').forEach((axis, i) => close(got[i], EX_ORIGIN_GEOCENTRIC[i], 1e-4, axis));
  });
});

describe('EPSG Guidance Note 7-2, topocentric methods 9837 and 9836', () => {
  const frame = new LocalFrame(EX_ORIGIN);
  it('9837: geographic point → east, north, up at the origin, to 1 mm', () => {
    const got = frame.enu(...geodeticToEcef(EX_GEOGRAPHIC));
    ['E', 'N', 'U'].forEach((axis, i) => close(got[i], EX_TOPOCENTRIC[i], 1e-3, axis));
  });
  it('9836: geocentric point (given to the cm) → east, north, up; within 3 mm of the same published values', () => {
    // The 9836 example states the point to 0.01 m (3771793.97, 140253.34, 5124304.35); the input
    // rounding alone moves the result by up to ~2 mm.
    const got = frame.enu(3771793.97, 140253.34, 5124304.35);
    ['E', 'N', 'U'].forEach((axis, i) => close(got[i], EX_TOPOCENTRIC[i], 3e-3, axis));
  });
});

describe('ellipsoid and analytic checks', () => {
  it('the pole lies at Z = b (NIMA TR8350.2 Table 3.3: 6356752.3142 m) and the equator at X = a', () => {
    close(geodeticToEcef({ lat: 90, lon: 0, height: 0 })[2], 6356752.3142, 1e-4, 'Z at the pole');
    close(WGS84_B, 6356752.3142, 1e-4, 'b');
    close(WGS84_E2, 6.69437999014e-3, 1e-14, 'e² (TR8350.2 Table 3.3)');
    expect(geodeticToEcef({ lat: 0, lon: 0, height: 0 })).toEqual([6378137, 0, 0]);
  });
  it('round trip geodetic → geocentric → geodetic over the globe, poles and heights from −100 m to 30 km', () => {
    for (const lat of [-90, -89.9999, -60, -1e-9, 0, 33.3, 89.99999, 90]) {
      for (const lon of [-180, -45, 0, 0.5, 179.999]) {
        for (const height of [-100, 0, 30000]) {
          const g = ecefToGeodetic(...geodeticToEcef({ lat, lon, height }));
          close(g.lat, lat, 1e-10, `lat at ${lat},${lon},${height}`);
          if (Math.abs(lat) < 90) close(((g.lon - lon + 540) % 360) - 180, 0, 1e-10, `lon at ${lat},${lon},${height}`);
          close(g.height, height, 1e-6, `height at ${lat},${lon},${height}`);
        }
      }
    }
  });
  it('range and bearing: points due north, east, south, west and straight up of a site (analytic)', () => {
    const site = { lat: -20, lon: 120, height: 10 };
    const frame = new LocalFrame(site);
    // A small offset along a meridian or parallel is nearly along the local north or east axis.
    const north = frame.rangeBearing(...geodeticToEcef({ ...site, lat: site.lat + 0.01 }));
    close(north.bearing, 0, 1e-6, 'north bearing');
    const east = frame.rangeBearing(...geodeticToEcef({ ...site, lon: site.lon + 0.01 }));
    close(east.bearing, 90, 0.01, 'east bearing');
    const south = frame.rangeBearing(...geodeticToEcef({ ...site, lat: site.lat - 0.01 }));
    close(south.bearing, 180, 1e-6, 'south bearing');
    const west = frame.rangeBearing(...geodeticToEcef({ ...site, lon: site.lon - 0.01 }));
    close(west.bearing, 270, 0.01, 'west bearing');
    const up = frame.rangeBearing(...geodeticToEcef({ ...site, height: site.height + 500 }));
    close(up.range, 500, 1e-6, 'range straight up');
    close(up.elevation, 90, 1e-6, 'elevation straight up');
    expect(up.bearing).toBeGreaterThanOrEqual(0);
  });
  it('slant range equals the straight-line distance of the geocentric points, and the bearing follows the EPSG 9837 vector', () => {
    const frame = new LocalFrame(EX_ORIGIN);
    const p = geodeticToEcef(EX_GEOGRAPHIC);
    const rb = frame.rangeBearing(...p);
    close(rb.range, Math.hypot(p[0] - frame.origin[0], p[1] - frame.origin[1], p[2] - frame.origin[2]), 1e-6, 'range');
    // bearing of the published E, N: atan2(E, N) in the third quadrant (south-west)
    close(rb.bearing, (Math.atan2(EX_TOPOCENTRIC[0], EX_TOPOCENTRIC[1]) * 180) / Math.PI + 360, 1e-6, 'bearing');
  });
});
