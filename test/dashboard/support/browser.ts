/**
 * Shared pieces of the dashboard's browser tests: the build (made here when missing or stale), the
 * system Chromium driven by playwright-core, and a page watcher that records console errors and
 * every request the page makes.
 *
 * Browser: Debian's `chromium` at /usr/bin/chromium (or PLUMBLINE_CHROMIUM), found or installed by
 * `npm test`'s pretest step (test/support/ensure-browser.ts). The accepted Chromium majors and their
 * source are in test/support/chromium.ts; a missing or too old browser fails the test with the
 * command that installs it. No browser is ever downloaded.
 *
 * Build: the tests serve dist/dashboard (what `npm run build` writes). When it is missing or older
 * than any source of the dashboard, `vite build` is run here first (about 5 s), so `vitest run`
 * alone works after editing the dashboard.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { chromium, type Browser, type ConsoleMessage, type Page } from 'playwright-core';
import { CHROMIUM, INSTALL, installedVersion, judgeMajor, parseMajor, pinnedChromiumMajor } from '../../support/chromium.js';

export { CHROMIUM, pinnedChromiumMajor };

export const ROOT = resolve(import.meta.dirname, '../../..');
export const DIST = join(ROOT, 'dist', 'dashboard');
export const ARTIFACTS = join(ROOT, 'test', 'artifacts');

function newestMtime(path: string): number {
  const s = statSync(path);
  if (!s.isDirectory()) return s.mtimeMs;
  return Math.max(s.mtimeMs, ...readdirSync(path).map((n) => newestMtime(join(path, n))));
}

function isFresh(): boolean {
  const index = join(DIST, 'index.html');
  const sources = Math.max(newestMtime(join(ROOT, 'dashboard')), newestMtime(join(ROOT, 'vite.config.ts')), newestMtime(join(ROOT, 'package-lock.json')));
  return existsSync(index) && statSync(index).mtimeMs >= sources;
}

const sleep = (ms: number) => Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, ms);

/**
 * Build the dashboard when dist/dashboard is missing or older than its sources. Test files run in
 * parallel: a lock directory makes one of them build while the others wait (at most 2 minutes).
 */
export function ensureDashboardBuilt(): 'fresh' | 'built' {
  if (isFresh()) return 'fresh';
  const lock = join(ROOT, 'dist', '.dashboard-build.lock');
  mkdirSync(join(ROOT, 'dist'), { recursive: true });
  for (let i = 0; ; i++) {
    try {
      mkdirSync(lock);
      break;
    } catch {
      if (i >= 1200) throw new Error(`another dashboard build holds ${lock} for over 2 minutes; remove it if no build is running`);
      sleep(100);
      if (isFresh()) return 'fresh';
    }
  }
  try {
    if (isFresh()) return 'fresh';
    execFileSync(process.execPath, [join(ROOT, 'node_modules', 'vite', 'bin', 'vite.js'), 'build', '--logLevel', 'warn'], { cwd: ROOT, stdio: 'pipe' });
    if (!existsSync(join(DIST, 'index.html'))) throw new Error(`vite build did not write ${join(DIST, 'index.html')}`);
    return 'built';
  } finally {
    rmSync(lock, { recursive: true, force: true });
  }
}

/** Launch the system Chromium headless; throws (never skips) with the install command when it is missing. */
export async function launchChromium(): Promise<Browser> {
  const version = installedVersion();
  if (version === undefined) {
    throw new Error(`The dashboard's browser tests need Chromium at ${CHROMIUM} and it is not there. Install Debian's package: \`${INSTALL}\` (\`npm test\` does it when run as root) or set PLUMBLINE_CHROMIUM. No browser is downloaded by npm.`);
  }
  const verdict = judgeMajor(parseMajor(version), pinnedChromiumMajor());
  if (!verdict.ok) throw new Error(verdict.message);
  return chromium.launch({
    executablePath: CHROMIUM,
    headless: true,
    args: [
      '--no-sandbox',
      '--disable-gpu',
      '--disable-background-networking',
      '--disable-component-update',
      '--disable-sync',
      '--no-first-run',
      '--disable-quic',
      // The browser's own calls home go to a dead end; loopback (the page's server) is never proxied.
      '--proxy-server=http://127.0.0.1:9',
      '--proxy-bypass-list=127.0.0.1;localhost',
    ],
  });
}

export interface PageWatch {
  readonly errors: string[];
  /** Requests (and WebSockets) of the page to any origin but `origin`. */
  readonly foreign: string[];
  readonly requests: string[];
}

/** Record console errors, uncaught exceptions and the page's requests. */
export function watchPage(page: Page, origin: string): PageWatch {
  const watch: PageWatch = { errors: [], foreign: [], requests: [] };
  const wsOrigin = origin.replace(/^http/, 'ws');
  page.on('console', (m: ConsoleMessage) => {
    if (m.type() === 'error') watch.errors.push(`console: ${m.text()}`);
  });
  page.on('pageerror', (e) => watch.errors.push(`uncaught: ${e.message}`));
  page.on('request', (r) => {
    const url = r.url();
    watch.requests.push(url);
    if (!url.startsWith(`${origin}/`) && !url.startsWith('data:')) watch.foreign.push(url);
  });
  page.on('websocket', (ws) => {
    const url = ws.url();
    watch.requests.push(url);
    if (!url.startsWith(`${wsOrigin}/`)) watch.foreign.push(url);
  });
  return watch;
}

/** Frame timings the page records: requestAnimationFrame intervals and long animation frames (ms). */
export interface Frames {
  raf: number[];
  loaf: number[];
}

/**
 * Frame recorder, installed with page.addInitScript before the page's own scripts (so it must be
 * self-contained: Playwright sends its source to the page).
 */
export function recordFrames(): void {
  const w = window as unknown as { __frames: Frames };
  w.__frames = { raf: [], loaf: [] };
  let last = performance.now();
  const tick = (t: number) => {
    w.__frames.raf.push(t - last);
    if (w.__frames.raf.length > 5000) w.__frames.raf.shift();
    last = t;
    requestAnimationFrame(tick);
  };
  requestAnimationFrame(tick);
  try {
    new PerformanceObserver((list) => {
      for (const e of list.getEntries()) w.__frames.loaf.push(e.duration);
    }).observe({ type: 'long-animation-frame', buffered: false });
  } catch {
    // not supported: only rAF intervals
  }
}

/** The q-quantile of a sample (nearest rank). */
export function quantile(xs: readonly number[], q: number): number {
  const s = [...xs].sort((a, b) => a - b);
  return s.length ? s[Math.min(s.length - 1, Math.floor(q * s.length))] : Number.NaN;
}

/** One failing axe-core rule: its id and the elements (selector and axe's summary) that fail it. */
export interface AxeViolation {
  readonly id: string;
  readonly impact: string | null;
  readonly nodes: ReadonlyArray<{ target: string; summary: string }>;
}

/** The WCAG 2.1 level A and AA rule tags of axe-core (axe-core's documented tag names). */
export const WCAG21_AA_TAGS = ['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa'] as const;

/**
 * Run axe-core (npm axe-core, pinned in package.json) on the page with only the WCAG 2.1 A/AA
 * rules, open shadow roots included. The script is evaluated through the DevTools protocol rather
 * than added as a <script> element: the dashboard's Content-Security-Policy (script-src 'self')
 * rightly refuses inline scripts, and the check must not weaken it.
 */
export async function axeViolations(page: Page): Promise<AxeViolation[]> {
  const source = readFileSync(join(ROOT, 'node_modules', 'axe-core', 'axe.min.js'), 'utf8');
  await page.evaluate(source);
  return page.evaluate(async (tags) => {
    const axe = (window as unknown as { axe: { run: (ctx: Document, o: unknown) => Promise<{ violations: Array<{ id: string; impact: string | null; nodes: Array<{ target: unknown[]; failureSummary?: string }> }> }> } }).axe;
    const r = await axe.run(document, { runOnly: { type: 'tag', values: tags }, resultTypes: ['violations'] });
    return r.violations.map((v) => ({ id: v.id, impact: v.impact, nodes: v.nodes.map((n) => ({ target: JSON.stringify(n.target), summary: n.failureSummary ?? '' })) }));
  }, [...WCAG21_AA_TAGS]);
}
