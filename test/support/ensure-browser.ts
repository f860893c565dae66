/**
 * `npm test`'s first step (the `pretest` script): make sure the browser tests have a Chromium that
 * playwright-core drives, on a fresh Debian machine as on a developer's.
 *
 * 1. Chromium at PLUMBLINE_CHROMIUM or /usr/bin/chromium, in the accepted range (test/support/chromium.ts
 *    says which and cites the source): done, one line.
 * 2. Missing or too old, and this process is root with apt-get: refresh the package lists
 *    (`apt-get update`, so a machine with stale lists does not install an old major), install
 *    Debian's `chromium`, check again.
 * 3. Otherwise: one line saying what to run, exit status 1 (the tests do not start).
 *
 * The version number is only a first filter; the browser smoke test (test/dashboard/browser.test.ts)
 * launches the browser and renders a page, which is the real check.
 */
import { execFileSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { CHROMIUM, INSTALL, installedVersion, judgeMajor, parseMajor, pinnedChromiumMajor } from './chromium.js';

function check(pinned: number): { ok: boolean; line: string } {
  const version = installedVersion();
  if (version === undefined) return { ok: false, line: `no Chromium at ${CHROMIUM}` };
  const verdict = judgeMajor(parseMajor(version), pinned);
  if (!verdict.ok) return { ok: false, line: verdict.message };
  return { ok: true, line: `browser tests: ${version || CHROMIUM} (playwright-core pins Chromium ${pinned})${verdict.note ? `; note: ${verdict.note}` : ''}` };
}

function aptPath(): string | undefined {
  return ['/usr/bin/apt-get', '/bin/apt-get'].find((p) => existsSync(p));
}

const pinned = pinnedChromiumMajor();
const first = check(pinned);
if (first.ok) {
  console.log(first.line);
  process.exit(0);
}

const apt = aptPath();
const root = typeof process.getuid === 'function' && process.getuid() === 0;
if (process.env.PLUMBLINE_CHROMIUM || !apt || !root) {
  const why = process.env.PLUMBLINE_CHROMIUM ? 'PLUMBLINE_CHROMIUM is set' : !apt ? 'no apt-get on this machine' : 'not running as root';
  console.error(`error: ${first.line}; the browser tests need Chromium ${pinned - 1} or later and ${why}, so run \`${root ? '' : 'sudo '}sh -c '${INSTALL}'\` (or set PLUMBLINE_CHROMIUM to such a Chromium) and then \`npm test\` again`);
  process.exit(1);
}

console.log(`${first.line}: installing Debian's chromium (${INSTALL})`);
const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
try {
  execFileSync(apt, ['update'], { stdio: 'inherit', env });
  execFileSync(apt, ['install', '-y', 'chromium'], { stdio: 'inherit', env });
} catch (e) {
  console.error(`error: \`${INSTALL}\` failed (${(e as Error).message.split('\n')[0]}); run it by hand and then \`npm test\` again`);
  process.exit(1);
}
const second = check(pinned);
if (!second.ok) {
  console.error(`error: after \`${INSTALL}\`: ${second.line}`);
  process.exit(1);
}
console.log(second.line);
