/**
 * The browser the dashboard tests drive works: launched headless through playwright-core, it lays
 * out a page, runs its script, draws on a canvas and makes a screenshot. This, not a version number,
 * is the check that the installed Chromium is one playwright-core drives (test/support/chromium.ts).
 * The page is given inline (no server, no network).
 */
import { inflateSync } from 'node:zlib';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { judgeMajor, parseMajor } from '../support/chromium.js';
import { launchChromium } from './support/browser.js';

/** Width, height and RGBA of pixel (x, y) of a PNG (8-bit RGBA or RGB, non-interlaced; PNG spec, W3C REC 2003, sections 11-12). */
function pngPixel(png: Buffer, x: number, y: number): { w: number; h: number; rgba: number[] } {
  expect(png.subarray(1, 4).toString('latin1')).toBe('PNG');
  let off = 8;
  let w = 0, h = 0, colourType = 0, depth = 0;
  const idat: Buffer[] = [];
  while (off < png.length) {
    const len = png.readUInt32BE(off);
    const type = png.subarray(off + 4, off + 8).toString('latin1');
    const data = png.subarray(off + 8, off + 8 + len);
    if (type === 'IHDR') { w = data.readUInt32BE(0); h = data.readUInt32BE(4); depth = data[8]; colourType = data[9]; }
    if (type === 'IDAT') idat.push(data);
    off += 12 + len;
  }
  expect(depth).toBe(8);
  const bpp = colourType === 6 ? 4 : 3;
  const raw = inflateSync(Buffer.concat(idat));
  const stride = w * bpp;
  const out = Buffer.alloc(h * stride);
  // Undo the per-row filters (PNG spec section 9).
  for (let r = 0; r < h; r++) {
    const f = raw[r * (stride + 1)];
    for (let i = 0; i < stride; i++) {
      const v = raw[r * (stride + 1) + 1 + i];
      const a = i >= bpp ? out[r * stride + i - bpp] : 0;
      const b = r > 0 ? out[(r - 1) * stride + i] : 0;
      const c = r > 0 && i >= bpp ? out[(r - 1) * stride + i - bpp] : 0;
      let p = v;
      if (f === 1) p = v + a;
      else if (f === 2) p = v + b;
      else if (f === 3) p = v + ((a + b) >> 1);
      else if (f === 4) { const pa = Math.abs(b - c), pb = Math.abs(a - c), pc = Math.abs(a + b - 2 * c); p = v + (pa <= pb && pa <= pc ? a : pb <= pc ? b : c); }
      out[r * stride + i] = p & 0xff;
    }
  }
  const at = y * stride + x * bpp;
  return { w, h, rgba: [out[at], out[at + 1], out[at + 2], bpp === 4 ? out[at + 3] : 255] };
}

let browser: Browser;
beforeAll(async () => {
  browser = await launchChromium();
});
afterAll(async () => {
  await browser?.close();
});

describe('the installed Chromium under playwright-core', () => {
  it('lays out a page, runs its script, draws a canvas and takes a screenshot', async () => {
    const page = await browser.newPage({ viewport: { width: 200, height: 100 } });
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(e.message));
    await page.setContent(`<!doctype html><html><body style="margin:0">
      <canvas id="c" width="200" height="100"></canvas><p id="out"></p>
      <script>
        const g = document.getElementById('c').getContext('2d');
        g.fillStyle = 'rgb(10, 200, 30)'; g.fillRect(0, 0, 100, 100);
        g.fillStyle = 'rgb(220, 20, 60)'; g.fillRect(100, 0, 100, 100);
        document.getElementById('out').textContent = String([1, 2, 3].map((x) => x * x).reduce((a, b) => a + b));
      </script></body></html>`);
    expect(await page.locator('#out').textContent()).toBe('14');
    const box = await page.locator('#c').boundingBox();
    expect(box).toEqual({ x: 0, y: 0, width: 200, height: 100 });
    const shot = await page.screenshot({ clip: { x: 0, y: 0, width: 200, height: 100 } });
    const left = pngPixel(shot, 50, 50);
    const right = pngPixel(shot, 150, 50);
    expect([left.w, left.h]).toEqual([200, 100]);
    // Colours as drawn, within 2 levels for colour management.
    left.rgba.slice(0, 3).forEach((v, i) => expect(Math.abs(v - [10, 200, 30][i])).toBeLessThanOrEqual(2));
    right.rgba.slice(0, 3).forEach((v, i) => expect(Math.abs(v - [220, 20, 60][i])).toBeLessThanOrEqual(2));
    expect(errors).toEqual([]);
    await page.close();
  });
});

describe('the accepted Chromium majors (test/support/chromium.ts)', () => {
  it('reads the major from Debian\'s version line', () => {
    expect(parseMajor('Chromium 156.0.8078.114 built on Debian GNU/Linux 12 (bookworm)')).toBe(156);
    expect(parseMajor('Google Chrome 155.0.7000.3 ')).toBe(155);
    expect(parseMajor('')).toBeUndefined();
  });
  it('accepts the pinned and the stable major, notes a newer one, refuses an older one', () => {
    expect(judgeMajor(156, 156)).toEqual({ ok: true });
    expect(judgeMajor(155, 156)).toEqual({ ok: true });
    const newer = judgeMajor(158, 156);
    expect(newer.ok && newer.note).toMatch(/newer than the 156/);
    const older = judgeMajor(154, 156);
    expect(older.ok).toBe(false);
    expect(!older.ok && older.message).toMatch(/apt-get update && apt-get install -y chromium/);
    expect(judgeMajor(undefined, 156).ok).toBe(false);
  });
});
