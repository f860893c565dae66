/**
 * A view gathered from several monitors (`plumbline gather`, ingest/broker/gather.ts) has no debrief
 * package of its own: the header links each monitor's package of its shard instead of
 * /api/debrief.zip. Rendered in Debian's Chromium from a stand-in server (support/synthetic-watch.ts)
 * sending an EventView with `gathered` set, as the gatherer does; the gatherer itself is checked to
 * set it in test/ingest/broker/broker.test.ts.
 */
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, expect, it } from 'vitest';
import { DIST, ensureDashboardBuilt, launchChromium } from './support/browser.js';
import { startSyntheticServer, type SyntheticServer } from './support/synthetic-watch.js';

const MONITORS = [
  { shard: 'north-lanes', url: 'http://127.0.0.1:7441' },
  { shard: 'south-lanes', url: 'http://127.0.0.1:7442' },
];
let server: SyntheticServer;
let browser: Browser | undefined;
let page: Page;

beforeAll(async () => {
  ensureDashboardBuilt();
  server = await startSyntheticServer({ staticDir: DIST, vignettes: 2, sims: 20, rate: 1, gathered: MONITORS });
  browser = await launchChromium();
  page = await browser.newPage();
  await page.goto(`${server.url}/`);
}, 60_000);

afterAll(async () => {
  await browser?.close();
  await server?.close();
});

it('links each monitor’s debrief package of its shard, and not a package of its own', async () => {
  const links = page.locator('pl-debrief-link a');
  await expect.poll(() => links.count(), { timeout: 20_000 }).toBe(MONITORS.length);
  const hrefs = await links.evaluateAll((as) => as.map((a) => a.getAttribute('href')));
  expect(hrefs).toEqual(MONITORS.map((m) => `${m.url}/api/debrief.zip`));
  const texts = await links.allTextContents();
  MONITORS.forEach((m, i) => expect(texts[i]).toContain(`shard ${m.shard}`));
});
