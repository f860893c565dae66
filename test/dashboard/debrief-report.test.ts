/**
 * The debrief report in Debian's Chromium (driven by playwright-core): WCAG 2.1 A/AA rules of
 * axe-core pass on screen and with print styles; printed to PDF, the document outline has one
 * entry per run section and every run starts on a page of its own; nothing is requested from any
 * origin; the one-page summary fits an A4 page. Writes the PDF and a PNG of the first page's content
 * box to test/artifacts/ (git-ignored) for review.
 *
 * Needs /usr/bin/chromium (`apt-get update && apt-get install -y chromium`); without it the test
 * fails and says so.
 */
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildPackage, writePackage } from '../../ingest/debrief/package.js';
import { fromService } from '../../ingest/debrief/source.js';
import type { AssessmentReport } from '../../ingest/report.js';
import { makeDemoJournal, type DemoJournal } from '../support/demo-journal.js';
import { ARTIFACTS, axeViolations, launchChromium } from './support/browser.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-report-'));
let demo: DemoJournal;
let report: AssessmentReport;
let browser: Browser | undefined;
let page: Page;
const requests: string[] = [];
let pdf: Buffer;

/** Titles of the PDF's outline (bookmarks): literal strings and UTF-16BE hex strings. */
function outlineTitles(bytes: Buffer): string[] {
  const text = bytes.toString('latin1');
  const titles: string[] = [];
  for (const m of text.matchAll(/\/Title\s*(?:\(((?:\\.|[^\\)])*)\)|<([0-9A-Fa-f]+)>)/g)) {
    if (m[1] !== undefined) titles.push(m[1].replace(/\\([()\\])/g, '$1'));
    else {
      const hex = m[2];
      const buf = Buffer.from(hex.startsWith('FEFF') || hex.startsWith('feff') ? hex.slice(4) : hex, 'hex');
      titles.push(buf.swap16().toString('utf16le'));
    }
  }
  return titles;
}

beforeAll(async () => {
  demo = await makeDemoJournal(dir);
  const input = fromService(demo.server.service, { kind: 'service', name: 'test' });
  report = input.report;
  writePackage(join(dir, 'pkg'), buildPackage(input));
  browser = await launchChromium();
  page = await browser.newPage({ viewport: { width: 1100, height: 1400 } });
  page.on('request', (r) => requests.push(r.url()));
  await page.goto(pathToFileURL(join(dir, 'pkg', 'report.html')).href);
}, 180_000);

afterAll(async () => {
  await browser?.close();
  await demo?.server.close();
  rmSync(dir, { recursive: true, force: true });
});

describe('the debrief report in a browser', () => {
  it('passes the WCAG 2.1 A/AA rules of axe-core on screen', async () => {
    const v = await axeViolations(page);
    expect(v, JSON.stringify(v, null, 1)).toEqual([]);
  });

  it('the check is live: the same rules flag grey text of 2.5:1 on white (WCAG 2.1 SC 1.4.3 asks 4.5:1)', async () => {
    const other = await (browser as Browser).newPage();
    await other.setContent('<!doctype html><html lang="en"><head><title>contrast</title></head><body><main><p style="color:#9aa5b4">grey on white</p></main></body></html>');
    const v = await axeViolations(other);
    await other.close();
    expect(v.map((x) => x.id)).toEqual(['color-contrast']);
  });

  it('passes them with the print styles too', async () => {
    await page.emulateMedia({ media: 'print' });
    const v = await axeViolations(page);
    await page.emulateMedia({ media: 'screen' });
    expect(v, JSON.stringify(v, null, 1)).toEqual([]);
  });

  it('prints to PDF with one outline entry per run section, each run on a page of its own', async () => {
    pdf = await page.pdf({ format: 'A4', printBackground: true, outline: true, tagged: true });
    mkdirSync(ARTIFACTS, { recursive: true });
    writeFileSync(join(ARTIFACTS, 'debrief-report.pdf'), pdf);
    const runs = outlineTitles(pdf).filter((t) => t.startsWith('Run '));
    expect(runs).toHaveLength(report.runs.length);
    expect(runs.map((t) => t.split(' — ')[0])).toEqual(report.runs.map((r) => `Run ${r.vignette} / ${r.track}`));
    // Page objects (/Type /Page, not /Pages): the summary, at least one page per run, the rest.
    const pages = (pdf.toString('latin1').match(/\/Type\s*\/Page(?![a-z])/g) ?? []).length;
    expect(pages).toBeGreaterThanOrEqual(report.runs.length + 2);
    // Each run section starts a page when printed (computed print style).
    await page.emulateMedia({ media: 'print' });
    const breaks = await page.locator('section.run').evaluateAll((els) => els.map((el) => getComputedStyle(el).breakBefore));
    await page.emulateMedia({ media: 'screen' });
    expect(breaks).toEqual(report.runs.map(() => 'page'));
  });

  it('the summary fits the first page; a PNG of that page is written for review; nothing was requested beyond the file', async () => {
    // The content box of an A4 page with the report's @page margins (10 mm × 11 mm), at 96 px per inch.
    const mm = 96 / 25.4;
    const box = { width: Math.floor((210 - 22) * mm), height: Math.floor((297 - 20) * mm) };
    await page.setViewportSize(box);
    await page.emulateMedia({ media: 'print' });
    const summary = await page.locator('section.summary').evaluate((el) => el.getBoundingClientRect().height);
    await page.screenshot({ path: join(ARTIFACTS, 'debrief-first-page.png') });
    await page.emulateMedia({ media: 'screen' });
    expect(summary).toBeLessThanOrEqual(box.height);
    expect(requests.filter((u) => !u.startsWith('file://'))).toEqual([]);
  });
});
