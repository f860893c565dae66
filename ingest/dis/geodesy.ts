/**
 * WGS 84 geodesy for the DIS bridge: geodetic ↔ geocentric (ECEF), geocentric → local
 * east-north-up (ENU) at a site, and slant range / bearing / elevation from a sensor site.
 *
 * Constants: WGS 84 semi-major axis a = 6378137 m and inverse flattening 1/f = 298.257223563
 * (NIMA TR8350.2, 3rd ed., Table 3.1, defining parameters; quoted from memory); e² = f(2 − f)
 * (TR8350.2 Table 3.3 gives 6.69437999014e-3).
 *
 * Methods: IOGP/EPSG Guidance Note 7-2 (Coordinate Conversions and Transformations including
 * Formulas), §4.1.1 geographic/geocentric conversions (EPSG method 9602) and §4.1.2 geocentric/
 * topocentric conversions (EPSG method 9836). The reverse conversion starts from Bowring's (1976)
 * formula, as in the Guidance Note, and refines the latitude by fixed-point iteration
 * φ ← atan2(Z + e²ν sin φ, p) to 1e-14 rad (at most 8 steps); the height is taken as
 * h = p cos φ + Z sin φ − a √(1 − e² sin² φ), which stays accurate near the poles.
 */

export const WGS84_A = 6378137;
export const WGS84_INV_F = 298.257223563;
export const WGS84_F = 1 / WGS84_INV_F;
export const WGS84_E2 = WGS84_F * (2 - WGS84_F);
export const WGS84_B = WGS84_A * (1 - WGS84_F);

const DEG = Math.PI / 180;
const MAX_LATITUDE_STEPS = 8;

/** A geodetic position: latitude and longitude in degrees (north, east positive), height above the ellipsoid in m. */
export interface Geodetic {
  readonly lat: number;
  readonly lon: number;
  readonly height: number;
}

export type Vec3 = readonly [number, number, number];

/** Prime-vertical radius of curvature ν at geodetic latitude φ (radians). */
function nu(sinPhi: number): number {
  return WGS84_A / Math.sqrt(1 - WGS84_E2 * sinPhi * sinPhi);
}

/** Geodetic → geocentric (EPSG 9602 forward): X = (ν+h)cosφcosλ, Y = (ν+h)cosφsinλ, Z = ((1−e²)ν+h)sinφ. */
export function geodeticToEcef(p: Geodetic): [number, number, number] {
  const phi = p.lat * DEG;
  const lam = p.lon * DEG;
  const s = Math.sin(phi);
  const c = Math.cos(phi);
  const n = nu(s);
  return [(n + p.height) * c * Math.cos(lam), (n + p.height) * c * Math.sin(lam), ((1 - WGS84_E2) * n + p.height) * s];
}

/** Geocentric → geodetic (EPSG 9602 reverse, Bowring start, iterated; see the module comment). */
export function ecefToGeodetic(x: number, y: number, z: number): Geodetic {
  const p = Math.hypot(x, y);
  const lam = Math.atan2(y, x);
  const ep2 = WGS84_E2 / (1 - WGS84_E2);
  const q = Math.atan2(z * WGS84_A, p * WGS84_B);
  let phi = Math.atan2(z + ep2 * WGS84_B * Math.sin(q) ** 3, p - WGS84_E2 * WGS84_A * Math.cos(q) ** 3);
  for (let i = 0; i < MAX_LATITUDE_STEPS; i++) {
    const s = Math.sin(phi);
    const next = Math.atan2(z + WGS84_E2 * nu(s) * s, p);
    const done = Math.abs(next - phi) < 1e-14;
    phi = next;
    if (done) break;
  }
  const s = Math.sin(phi);
  const height = p * Math.cos(phi) + z * s - WGS84_A * Math.sqrt(1 - WGS84_E2 * s * s);
  return { lat: phi / DEG, lon: lam / DEG, height };
}

/**
 * A site prepared for repeated conversions: its geocentric position and the rotation to its local
 * east-north-up frame (EPSG 9836):
 *   E = −sinλ₀ΔX + cosλ₀ΔY
 *   N = −sinφ₀cosλ₀ΔX − sinφ₀sinλ₀ΔY + cosφ₀ΔZ
 *   U =  cosφ₀cosλ₀ΔX + cosφ₀sinλ₀ΔY + sinφ₀ΔZ
 */
export class LocalFrame {
  readonly origin: [number, number, number];
  private readonly sinPhi: number;
  private readonly cosPhi: number;
  private readonly sinLam: number;
  private readonly cosLam: number;

  constructor(readonly site: Geodetic) {
    this.origin = geodeticToEcef(site);
    this.sinPhi = Math.sin(site.lat * DEG);
    this.cosPhi = Math.cos(site.lat * DEG);
    this.sinLam = Math.sin(site.lon * DEG);
    this.cosLam = Math.cos(site.lon * DEG);
  }

  /** Geocentric position → east, north, up (m) at the site. */
  enu(x: number, y: number, z: number): [number, number, number] {
    const dx = x - this.origin[0];
    const dy = y - this.origin[1];
    const dz = z - this.origin[2];
    return [
      -this.sinLam * dx + this.cosLam * dy,
      -this.sinPhi * this.cosLam * dx - this.sinPhi * this.sinLam * dy + this.cosPhi * dz,
      this.cosPhi * this.cosLam * dx + this.cosPhi * this.sinLam * dy + this.sinPhi * dz,
    ];
  }

  /**
   * Slant range (m, straight line from the site), bearing (degrees clockwise from true north, in
   * [0, 360), of the horizontal projection in the site's ENU frame) and elevation (degrees above
   * the site's horizontal plane). Bearing is 0 for a point straight above the site.
   */
  rangeBearing(x: number, y: number, z: number): { range: number; bearing: number; elevation: number } {
    const [e, n, u] = this.enu(x, y, z);
    const horizontal = Math.hypot(e, n);
    let bearing = Math.atan2(e, n) / DEG;
    if (bearing < 0) bearing += 360;
    if (bearing >= 360) bearing -= 360;
    return { range: Math.hypot(horizontal, u), bearing, elevation: Math.atan2(u, horizontal) / DEG };
  }
}
