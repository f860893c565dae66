/**
 * `npm test`'s broker step (chained in the `pretest` script after the browser's): make sure the
 * broker tests (test/ingest/broker/) find a NATS server with JetStream, on a fresh Debian machine as
 * on a developer's. Same policy as ./ensure-browser.ts:
 *
 * 1. `nats-server` at PLUMBLINE_NATS_SERVER or on the PATH, 2.2 or later (the first release with
 *    JetStream, per the NATS server release notes): done, one line.
 * 2. Missing or too old, and this process is root with apt-get: refresh the package lists if the
 *    package is unknown to them, install Debian's `nats-server`, check again.
 * 3. Otherwise: one line saying what to run, exit status 1 (the tests do not start).
 */
import { execFileSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { INSTALL_BROKER, natsServerPath, natsServerVersion } from './broker.js';

/** JetStream arrived in nats-server 2.2.0 (NATS server release notes, from memory). */
const MIN = [2, 2] as const;

function check(): { ok: boolean; line: string } {
  const path = natsServerPath();
  if (!path) return { ok: false, line: process.env.PLUMBLINE_NATS_SERVER ? `no nats-server at ${process.env.PLUMBLINE_NATS_SERVER}` : 'no nats-server on the PATH' };
  const version = natsServerVersion(path);
  const m = /(\d+)\.(\d+)\.(\d+)/.exec(version ?? '');
  if (!m) return { ok: false, line: `${path} does not report a version` };
  const [major, minor] = [Number(m[1]), Number(m[2])];
  if (major < MIN[0] || (major === MIN[0] && minor < MIN[1])) return { ok: false, line: `${path} is ${m[0]}, older than ${MIN.join('.')} (no JetStream)` };
  return { ok: true, line: `broker tests: ${path} ${m[0]}` };
}

function aptPath(): string | undefined {
  return ['/usr/bin/apt-get', '/bin/apt-get'].find((p) => existsSync(p));
}

function aptKnows(): boolean {
  try {
    return /Candidate: (?!\(none\))/.test(execFileSync('apt-cache', ['policy', 'nats-server'], { encoding: 'utf8' }));
  } catch {
    return false;
  }
}

const first = check();
if (first.ok) {
  console.log(first.line);
  process.exit(0);
}

const apt = aptPath();
const root = typeof process.getuid === 'function' && process.getuid() === 0;
if (process.env.PLUMBLINE_NATS_SERVER || !apt || !root) {
  const why = process.env.PLUMBLINE_NATS_SERVER ? 'PLUMBLINE_NATS_SERVER is set' : !apt ? 'no apt-get on this machine' : 'not running as root';
  console.error(`error: ${first.line}; the broker tests need nats-server ${MIN.join('.')} or later and ${why}, so run \`${root ? '' : 'sudo '}sh -c '${INSTALL_BROKER}'\` (or set PLUMBLINE_NATS_SERVER to such a nats-server) and then \`npm test\` again`);
  process.exit(1);
}

console.log(`${first.line}: installing Debian's nats-server (${INSTALL_BROKER})`);
const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
try {
  if (!aptKnows()) execFileSync(apt, ['update'], { stdio: 'inherit', env });
  execFileSync(apt, ['install', '-y', 'nats-server'], { stdio: 'inherit', env });
} catch (e) {
  console.error(`error: \`${INSTALL_BROKER}\` failed (${(e as Error).message.split('\n')[0]}); run it by hand and then \`npm test\` again`);
  process.exit(1);
}
const second = check();
if (!second.ok) {
  console.error(`error: after \`${INSTALL_BROKER}\`: ${second.line}`);
  process.exit(1);
}
console.log(second.line);
