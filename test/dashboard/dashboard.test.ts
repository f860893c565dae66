/**
 * The dashboard in a real browser against a real server: the demo event (40 simulated runs per
 * vignette) replayed at 40× with four runs in flight at a time, watched by Debian's Chromium driven
 * by playwright-core. Checks what a range team relies on: the p-values on the page are the
 * server's, the combined evidence appears, keyboard navigation, notes round-trip through the
 * socket, text from producers stays text, no console errors, no request beyond the page's own
 * server. Saves screenshots and the measured figures to test/artifacts/.
 *
 * Needs /usr/bin/chromium (`apt-get update && apt-get install -y chromium`); without it the test
 * fails and says so. Builds dist/dashboard first when it is missing or stale (see support/browser.ts).
 */
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { unzipSync } from 'fflate';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RawTrack } from '../../engine/types.js';
import { writeDemoFiles } from '../../ingest/cli/demo-files.js';
import { loadPlan } from '../../ingest/plan.js';
import { replay } from '../../ingest/service/replay.js';
import { startServer, type RunningServer } from '../../ingest/service/server.js';
import type { EventView } from '../../ingest/service/view.js';
import { readTracks } from '../../ingest/tracks-reader.js';
import { formatP } from '../../dashboard/src/format.js';
import { ARTIFACTS, axeViolations, DIST, ensureDashboardBuilt, launchChromium, quantile, recordFrames, watchPage, type Frames, type PageWatch } from './support/browser.js';

const XSS_VIGNETTE = 'S1-L3';
const XSS_LABEL = 'sea state low, lane 3 <img src=x onerror="window.__plumblineXss=1"><b>bold?</b>';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-dashboard-'));
let server: RunningServer;
let browser: Browser | undefined;
let page: Page;
let watch: PageWatch;
let replayDone: Promise<unknown>;
let replayError: unknown;
let liveRuns: RawTrack[] = [];
const figures: Record<string, unknown> = {};

/** A selector path through the page's shadow roots (Playwright's CSS locators pierce open shadow roots). */
const run = (key: string) => page.locator(`tr.run[data-run="${key}"]`);
const state = async (): Promise<EventView> => (await fetch(`${server.url}/api/state`)).json() as Promise<EventView>;
const selectedKey = () => page.locator(`tr.run[aria-selected="true"]`).getAttribute('data-run');


beforeAll(async () => {
  figures.build = ensureDashboardBuilt();
  const files = await writeDemoFiles(join(dir, 'demo'), { seed: 7, simsPerVignette: 40, liveRunsPerVignette: 2 });
  // A producer-supplied label with markup in it: it must be shown as text.
  const planJson = JSON.parse(readFileSync(files.plan, 'utf8')) as { vignettes: Array<{ id: string; label?: string }> };
  const v = planJson.vignettes.find((x) => x.id === XSS_VIGNETTE);
  if (v) v.label = XSS_LABEL;
  writeFileSync(files.plan, JSON.stringify(planJson, null, 2));
  server = await startServer({ planPath: files.plan, baselinePath: files.baseline, journalPath: join(dir, 'journal.db'), port: 0, staticDir: DIST });
  await server.service.settle();
  const plan = await loadPlan(files.plan);
  const all = (await readTracks(files.live, plan)).tracks;
  // Every vignette's first run, and a second run of S3-L1 (a vignette with two runs).
  liveRuns = [...all.filter((t) => t.track === 'live-1'), ...all.filter((t) => t.track === 'live-2' && t.vignette === 'S3-L1')];

  browser = await launchChromium();
  page = await browser.newPage({ viewport: { width: 1600, height: 1000 } });
  await page.addInitScript(recordFrames);
  watch = watchPage(page, server.url);
  const t0 = Date.now();
  await page.goto(`${server.url}/`);
  const firstRows = await page.waitForFunction(() => {
    const app = document.querySelector('pl-app')?.shadowRoot;
    const rows = app?.querySelector('pl-event-overview')?.shadowRoot?.querySelectorAll('tbody.vignette');
    return rows && rows.length > 0 ? performance.now() : undefined;
  });
  const nav = await page.evaluate(() => {
    const n = performance.getEntriesByType('navigation')[0] as PerformanceNavigationTiming;
    return { domContentLoaded: n.domContentLoadedEventEnd, load: n.loadEventEnd, transferBytes: performance.getEntriesByType('resource').reduce((s, r) => s + (r as PerformanceResourceTiming).transferSize, n.transferSize) };
  });
  figures.pageLoad = { ...nav, firstOverviewMs: await firstRows.jsonValue(), wallMs: Date.now() - t0 };

  replayDone = replay({ url: `${server.url.replace(/^http/, 'ws')}/feed`, plan, live: liveRuns, speed: 40, overlap: 4 }).catch((e: unknown) => {
    replayError = e;
  });
}, 120_000);

afterAll(async () => {
  await replayDone?.catch(() => undefined);
  await browser?.close();
  await server?.close();
  mkdirSync(ARTIFACTS, { recursive: true });
  writeFileSync(join(ARTIFACTS, 'dashboard-figures.json'), `${JSON.stringify(figures, null, 2)}\n`);
  process.stdout.write(`dashboard figures: ${JSON.stringify(figures)}\n`);
  rmSync(dir, { recursive: true, force: true });
});

describe('the dashboard against a live event', () => {
  it('shows every vignette with its condition and baseline, and stays smooth while runs are in flight', async () => {
    const ev = await state();
    for (const v of ev.vignettes) {
      const group = page.locator(`tbody.vignette[data-vignette="${v.id}"]`);
      await expect.poll(() => group.count()).toBe(1);
      await expect.poll(() => group.locator('.status').first().textContent()).toContain(`ready · ${v.baseline.sims} sims`);
    }
    // Runs in flight: provisional p-values (hollow, italic, the word) appear.
    await expect.poll(() => page.locator('.p.provisional').count(), { timeout: 30_000 }).toBeGreaterThan(0);
    const provisional = page.locator('.p.provisional').first();
    expect(await provisional.locator('.word').textContent()).toBe('provisional');
    expect(await provisional.locator('.mark').textContent()).toMatch(/[◇○]/);
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: join(ARTIFACTS, 'dashboard-in-flight.png') });
    // WCAG 2.1 A/AA (axe-core) with runs in flight: provisional values, busy and ready states shown.
    const inFlight = await axeViolations(page);
    figures.axeInFlight = inFlight.map((v) => ({ id: v.id, nodes: v.nodes.length }));
    expect(inFlight, JSON.stringify(inFlight, null, 1)).toEqual([]);
    // Frame times over 4 s with four runs in flight.
    await page.evaluate(() => {
      const w = window as unknown as { __frames: Frames };
      w.__frames.raf.length = 0;
      w.__frames.loaf.length = 0;
    });
    await page.waitForTimeout(4000);
    const frames = await page.evaluate(() => (window as unknown as { __frames: Frames }).__frames);
    figures.framesWhileInFlight = {
      frames: frames.raf.length,
      intervalMs: { p50: quantile(frames.raf, 0.5), p95: quantile(frames.raf, 0.95), max: Math.max(...frames.raf) },
      longAnimationFrames: { count: frames.loaf.length, maxMs: frames.loaf.length ? Math.max(...frames.loaf) : 0 },
    };
    expect(frames.raf.length).toBeGreaterThan(20);
  });

  it('moves the selection with j/k and the arrow keys, in the order shown', async () => {
    const order = await page.locator('tr.run').evaluateAll((rows) => rows.map((r) => (r as HTMLElement).dataset.run as string));
    expect(order.length).toBeGreaterThan(2);
    await page.locator(`tr.run[data-run="${order[0]}"]`).click();
    await expect.poll(selectedKey).toBe(order[0]);
    await page.locator('pl-app header .brand').click();
    await page.keyboard.press('j');
    await expect.poll(selectedKey).toBe(order[1]);
    await page.keyboard.press('j');
    await expect.poll(selectedKey).toBe(order[2]);
    await page.keyboard.press('k');
    await expect.poll(selectedKey).toBe(order[1]);
    // Arrow keys on the focused row; focus follows the selection (visible focus ring on the row).
    await run(order[1]).focus();
    await page.keyboard.press('ArrowDown');
    await expect.poll(selectedKey).toBe(order[2]);
    await expect.poll(() => run(order[2]).evaluate((el) => el.matches(':focus'))).toBe(true);
    await expect.poll(() => page.locator('[data-selected-run]').getAttribute('data-selected-run')).toBe(order[2]);
  });

  it('shows a producer label with markup as text', async () => {
    const label = page.locator(`tbody.vignette[data-vignette="${XSS_VIGNETTE}"] .label`);
    expect(await label.textContent()).toBe(XSS_LABEL);
    expect(await page.locator('pl-app img').count()).toBe(0);
    expect(await page.locator('pl-event-overview b').count()).toBe(0);
    expect(await page.evaluate(() => (window as unknown as { __plumblineXss?: number }).__plumblineXss)).toBeUndefined();
  });

  it('sends a note for the selected run over the socket; it appears in the log and in /api/state', async () => {
    const target = liveRuns[1];
    const key = `${target.vignette}/${target.track}`;
    await run(key).click();
    await expect.poll(selectedKey).toBe(key);
    const text = `wake crossing seen from the tower <script>alert(1)</script> ${Date.now()}`;
    await page.locator('#note-text').fill(text);
    await page.locator('#note-author').fill('range safety');
    await page.locator('pl-log-panel button[type="submit"]').click();
    await expect.poll(() => page.locator('pl-log-panel [role="status"].ok').textContent()).toContain(`Note added to ${key}`);
    const entry = page.locator('pl-log-panel li.note', { hasText: text });
    await expect.poll(() => entry.count()).toBe(1);
    expect(await entry.locator('.text').textContent()).toContain(text);
    expect(await entry.locator('.link').textContent()).toContain(key);
    const logged = (await state()).log.find((e) => e.text === text);
    expect(logged).toMatchObject({ kind: 'note', vignette: target.vignette, track: target.track, author: 'range safety' });
    expect(logged?.t).toBeGreaterThanOrEqual(0);
    // The run's note count follows.
    await expect.poll(() => run(key).locator('.notes .num').textContent()).toBe('1');
    // Clicking the entry's run link selects that run.
    await run(liveRuns[0].vignette + '/' + liveRuns[0].track).click();
    await entry.locator('.link').click();
    await expect.poll(selectedKey).toBe(key);
  });

  it('shows the server’s final p-value for every completed run and the combined evidence', async () => {
    await replayDone;
    expect(replayError).toBeUndefined();
    await server.service.settle();
    const ev = await state();
    const done = ev.runs.filter((r) => r.judgement?.kind === 'final');
    expect(done.length).toBe(liveRuns.length);
    for (const r of done) {
      const p = run(r.key).locator('.p');
      await expect.poll(() => p.getAttribute('data-kind'), { timeout: 15_000 }).toBe('final');
      expect(Number(await p.getAttribute('data-value'))).toBe(r.judgement?.pValues.overall);
      expect(await p.locator('.value').textContent()).toBe(formatP(r.judgement?.pValues.overall));
    }
    const combined = page.locator('#combined');
    await expect.poll(() => combined.getAttribute('data-value'), { timeout: 15_000 }).toBe(String(ev.combined?.pValue));
    expect(await combined.textContent()).toContain(`Event combined (${ev.combined?.count} runs)`);
    // The three per-statistic combined values beside the headline, equal to the server's.
    for (const k of ['l2', 'score', 'residual'] as const) {
      expect(await combined.locator(`[data-statistic="${k}"]`).getAttribute('data-value')).toBe(String(ev.combined?.byStatistic[k]));
    }
    expect(await combined.textContent()).toContain('valid only for a run count fixed in advance');
    // The evidence timeline names its method and its validity.
    expect(await page.locator('pl-evidence-timeline li').first().textContent()).toContain('fixed-sample: valid only for a run count fixed in advance');

    // Screenshots: the whole page, the overview, and the run detail of the run with the smallest p.
    mkdirSync(ARTIFACTS, { recursive: true });
    const lowest = [...done].sort((a, b) => (a.judgement?.pValues.overall ?? 1) - (b.judgement?.pValues.overall ?? 1))[0];
    await run(lowest.key).click();
    await expect.poll(() => page.locator(`[data-verdict="${lowest.key}"]`).count()).toBe(1);
    await expect.poll(() => page.locator('pl-channel-chart canvas').count()).toBeGreaterThan(0);
    await page.waitForTimeout(600);
    await page.screenshot({ path: join(ARTIFACTS, 'dashboard-page.png'), fullPage: true });
    await page.locator('section[aria-label="event overview"]').screenshot({ path: join(ARTIFACTS, 'dashboard-overview.png') });
    await page.locator('pl-app .work').screenshot({ path: join(ARTIFACTS, 'dashboard-run-detail.png') });
    // WCAG 2.1 A/AA (axe-core) at the end: final values, verdicts, a selected run, notes.
    const done2 = await axeViolations(page);
    figures.axeComplete = done2.map((v) => ({ id: v.id, nodes: v.nodes.length }));
    expect(done2, JSON.stringify(done2, null, 1)).toEqual([]);
    // And as printed from the browser.
    await page.emulateMedia({ media: 'print' });
    const printed = await axeViolations(page);
    await page.emulateMedia({ media: 'screen' });
    expect(printed, JSON.stringify(printed, null, 1)).toEqual([]);
  });

  it('offers the debrief package of the event as one .zip download from the header', async () => {
    const link = page.locator('pl-debrief-link a');
    expect(await link.getAttribute('href')).toBe('/api/debrief.zip');
    expect(await link.textContent()).toContain('Debrief package');
    const [download] = await Promise.all([page.waitForEvent('download'), link.click()]);
    const file = join(dir, 'downloaded.zip');
    await download.saveAs(file);
    const entries = Object.keys(unzipSync(readFileSync(file)));
    expect(entries.sort()).toEqual(['debrief/notes.csv', 'debrief/report.html', 'debrief/results.json', 'debrief/runs.csv']);
  });

  it('logged no console error and asked nothing of any origin but its own server', () => {
    expect(watch.errors).toEqual([]);
    expect(watch.foreign).toEqual([]);
    expect(watch.requests.some((u) => u.endsWith('/watch'))).toBe(true);
    figures.pageRequests = { total: watch.requests.length, detail: watch.requests.filter((u) => u.includes('/api/runs/')).length };
  });
});
