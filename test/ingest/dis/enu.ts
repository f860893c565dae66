/**
 * Test helper: local east-north-up at a site → geocentric (WGS 84), the transpose of the EPSG
 * Guidance Note 7-2 method 9836 rotation plus the site's position, written out independently of
 * ingest/dis/geodesy.ts's own ENU code (which goes the other way).
 */
import { geodeticToEcef } from '../../../ingest/dis/geodesy.js';

export function enuToEcef(site: { lat: number; lon: number; height: number }, e: number, n: number, u: number): [number, number, number] {
  const phi = (site.lat * Math.PI) / 180;
  const lam = (site.lon * Math.PI) / 180;
  const [x0, y0, z0] = geodeticToEcef(site);
  return [
    x0 - Math.sin(lam) * e - Math.sin(phi) * Math.cos(lam) * n + Math.cos(phi) * Math.cos(lam) * u,
    y0 + Math.cos(lam) * e - Math.sin(phi) * Math.sin(lam) * n + Math.cos(phi) * Math.sin(lam) * u,
    z0 + Math.cos(phi) * n + Math.sin(phi) * u,
  ];
}
