/**
 * A real NATS server with JetStream for the broker tests and benchmarks: spawned on a free loopback
 * port with its store in a fresh temporary folder, stopped (and the folder removed) by `stop`.
 * `restart` stops and starts it again on the same port and store, as an operator would.
 */
import { execFileSync, spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { connect } from 'node:net';
import { tmpdir } from 'node:os';
import { delimiter, join } from 'node:path';
import { freePort } from './net.js';

export const INSTALL_BROKER = 'apt-get update && apt-get install -y nats-server';

/** nats-server from PLUMBLINE_NATS_SERVER, else the first on the PATH (Debian installs /usr/sbin/nats-server). */
export function natsServerPath(): string | undefined {
  const given = process.env.PLUMBLINE_NATS_SERVER;
  if (given) return existsSync(given) ? given : undefined;
  for (const dir of [...(process.env.PATH ?? '').split(delimiter), '/usr/sbin', '/usr/bin']) {
    const p = join(dir, 'nats-server');
    if (dir && existsSync(p)) return p;
  }
  return undefined;
}

export function natsServerVersion(path: string): string | undefined {
  try {
    return execFileSync(path, ['--version'], { encoding: 'utf8', timeout: 10_000 }).trim();
  } catch {
    return undefined;
  }
}

export interface TestBroker {
  readonly url: string;
  readonly port: number;
  readonly storeDir: string;
  restart(): Promise<void>;
  stop(): Promise<void>;
}

async function waitForPort(port: number, child: ChildProcess, output: () => string, timeoutMs = 15_000): Promise<void> {
  const until = Date.now() + timeoutMs;
  for (;;) {
    if (child.exitCode !== null) throw new Error(`nats-server exited with ${child.exitCode}: ${output()}`);
    const ok = await new Promise<boolean>((res) => {
      const s = connect(port, '127.0.0.1');
      s.once('connect', () => {
        s.destroy();
        res(true);
      });
      s.once('error', () => res(false));
    });
    // The port opens once the server is ready for clients (JetStream is set up before it).
    if (ok && /Server is ready/.test(output())) return;
    if (Date.now() > until) throw new Error(`nats-server did not start on port ${port} within ${timeoutMs} ms: ${output()}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

/** Start `nats-server -js -a 127.0.0.1 -p <free port> -sd <tmpdir>`. */
export async function startBroker(): Promise<TestBroker> {
  const bin = natsServerPath();
  if (!bin) throw new Error(`no nats-server: run \`${INSTALL_BROKER}\` (npm test does it when run as root)`);
  const port = await freePort();
  const storeDir = mkdtempSync(join(tmpdir(), 'plumbline-nats-'));
  let child: ChildProcess;
  let out = '';
  const launch = async () => {
    out = '';
    child = spawn(bin, ['-js', '-a', '127.0.0.1', '-p', String(port), '-sd', storeDir], { stdio: ['ignore', 'pipe', 'pipe'] });
    child.stdout?.on('data', (d: Buffer) => (out += d.toString()));
    child.stderr?.on('data', (d: Buffer) => (out += d.toString()));
    await waitForPort(port, child, () => out);
  };
  const halt = async () => {
    if (child.exitCode !== null || child.signalCode !== null) return;
    const exited = new Promise<void>((r) => child.once('exit', () => r()));
    child.kill('SIGTERM');
    const t = setTimeout(() => child.kill('SIGKILL'), 5000);
    await exited;
    clearTimeout(t);
  };
  await launch();
  return {
    url: `nats://127.0.0.1:${port}`,
    port,
    storeDir,
    async restart() {
      await halt();
      await launch();
    },
    async stop() {
      await halt();
      rmSync(storeDir, { recursive: true, force: true });
    },
  };
}
