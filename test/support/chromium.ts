/**
 * Which Chromium the browser tests drive, and whether its major version is one playwright-core
 * drives correctly. Shared by the `pretest` step (test/support/ensure-browser.ts) and the browser
 * tests (test/dashboard/support/browser.ts). No browser is ever downloaded: the tests use Debian's
 * `chromium` package at /usr/bin/chromium (or PLUMBLINE_CHROMIUM).
 *
 * The accepted range, and its source. playwright-core pins one Chromium build
 * (node_modules/playwright-core/browsers.json; 156 for playwright-core 1.64). Playwright's own
 * documentation (https://playwright.dev/docs/browsers, section "Google Chrome & Microsoft Edge")
 * says that because the Chromium project is ahead of the branded browsers, "when the world is on
 * Google Chrome N, Playwright already supports Chromium N+1", and that the current Playwright
 * version supports the Stable and Beta channels of those browsers. Its release notes say the same
 * per release ("This version was also tested against the following stable channels: Google
 * Chrome 114" for v1.36, whose pinned Chromium is 115). The documented range is therefore the
 * pinned major P and the stable major P - 1.
 *
 * A browser older than P - 1 lacks DevTools protocol methods playwright relies on (a Playwright
 * maintainer, microsoft/playwright-python#168: "Playwright does only support one of the latest
 * versions of Chromium since we rely on features in the Chrome DevTools Protocol which were added
 * especially because of Playwright's needs"), so it is refused with the command that updates it.
 * A newer browser than P is not covered by a statement, but Chromium keeps its protocol backwards
 * compatible within the range playwright uses, and Debian's security updates move the major every
 * few weeks: it is accepted with a note, and the browser smoke test (test/dashboard/browser.test.ts,
 * which launches it and renders a page) is what decides whether it works.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join, resolve } from 'node:path';

export const ROOT = resolve(import.meta.dirname, '../..');
export const CHROMIUM = process.env.PLUMBLINE_CHROMIUM ?? '/usr/bin/chromium';
export const INSTALL = 'apt-get update && apt-get install -y chromium';

/** The Chromium major version playwright-core was built for. */
export function pinnedChromiumMajor(): number {
  const browsers = JSON.parse(readFileSync(join(ROOT, 'node_modules', 'playwright-core', 'browsers.json'), 'utf8')) as { browsers: Array<{ name: string; browserVersion: string }> };
  const c = browsers.browsers.find((b) => b.name === 'chromium');
  if (!c) throw new Error('node_modules/playwright-core/browsers.json names no chromium');
  return Number(c.browserVersion.split('.')[0]);
}

/** Parse the major version out of `chromium --version` ("Chromium 156.0.8078.114 built on Debian ..."). */
export function parseMajor(versionLine: string): number | undefined {
  const m = /(\d+)\.\d+\.\d+/.exec(versionLine);
  return m ? Number(m[1]) : undefined;
}

export type Verdict =
  | { ok: true; note?: string }
  | { ok: false; reason: 'too-old' | 'unreadable'; message: string };

/** Judge an installed major against the pinned one (see the module comment for the range). */
export function judgeMajor(major: number | undefined, pinned: number, path = CHROMIUM): Verdict {
  if (major === undefined || !Number.isFinite(major)) {
    return { ok: false, reason: 'unreadable', message: `${path} --version printed no version number` };
  }
  if (major < pinned - 1) {
    return { ok: false, reason: 'too-old', message: `${path} is Chromium ${major}, older than the ${pinned - 1}-${pinned} that playwright-core drives; refresh the package lists and update it: ${INSTALL}` };
  }
  if (major > pinned) {
    return { ok: true, note: `${path} is Chromium ${major}, newer than the ${pinned} playwright-core pins; the browser smoke test decides whether it works` };
  }
  return { ok: true };
}

/** `chromium --version` of the configured browser, or undefined when it is not there. */
export function installedVersion(path = CHROMIUM): string | undefined {
  if (!existsSync(path)) return undefined;
  try {
    return execFileSync(path, ['--version'], { encoding: 'utf8', timeout: 30_000, stdio: ['ignore', 'pipe', 'pipe'] }).trim();
  } catch {
    return '';
  }
}
