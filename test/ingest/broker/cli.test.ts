/**
 * The broker's commands as a user runs them (child processes through tsx): exit code 2 and one
 * line saying what is wrong for a shard without a broker, an unreachable broker and a vignette
 * outside the plan; `plumbline publish` stores every message of the file on the stream.
 */
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan } from '../../../ingest/plan.js';
import { readTracks } from '../../../ingest/tracks-reader.js';
import { connectBroker, ensureStreams } from '../../../ingest/broker/streams.js';
import { inputStream } from '../../../ingest/broker/subjects.js';
import { startBroker, type TestBroker } from '../../support/broker.js';
import { freePort } from '../../support/net.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-broker-cli-'));
const args = (...a: string[]) => ['--import', 'tsx', join(process.cwd(), 'ingest', 'cli', 'main.ts'), ...a];
const cli = (...a: string[]) => spawnSync(process.execPath, args(...a), { encoding: 'utf8', cwd: process.cwd() });
/** Async, so the test's broker (in this process's event loop) keeps answering meanwhile. */
const cliAsync = (...a: string[]) =>
  new Promise<{ status: number | null; stderr: string }>((resolve) => {
    const child = spawn(process.execPath, args(...a), { cwd: process.cwd(), stdio: ['ignore', 'ignore', 'pipe'] });
    let stderr = '';
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    child.once('exit', (status) => resolve({ status, stderr }));
  });

let files: Awaited<ReturnType<typeof writeDemoFiles>>;
let broker: TestBroker;
beforeAll(async () => {
  files = await writeDemoFiles(join(dir, 'demo'), { seed: 3, simsPerVignette: 20 });
  broker = await startBroker();
}, 60_000);
afterAll(async () => {
  await broker?.stop();
  rmSync(dir, { recursive: true, force: true });
});

describe('plumbline serve --broker, publish', () => {
  it('refuses --shard without --broker', async () => {
    const r = cli('serve', '--plan', files.plan, '--baseline', files.baseline, '--journal', join(dir, 'a.sqlite'), '--port', String(await freePort()), '--shard', 'S1-L1');
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/--shard needs --broker nats:\/\/HOST:PORT/);
  }, 60_000);

  it('says when the broker cannot be reached', async () => {
    const r = cli('publish', '--broker', `nats://127.0.0.1:${await freePort()}`, '--live', files.live, '--plan', files.plan);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/cannot reach the broker at nats:\/\/127\.0\.0\.1:\d+/);
  }, 60_000);

  it('refuses a shard vignette that is not in the plan', async () => {
    const r = await cliAsync('serve', '--plan', files.plan, '--baseline', files.baseline, '--journal', join(dir, 'b.sqlite'), '--port', String(await freePort()), '--broker', broker.url, '--shard', 'S1-L1,S9-L9');
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/vignette "S9-L9" of the shard is not in the plan/);
  }, 60_000);

  it('publishes every run of a track file: open, points in messages of 50, close', async () => {
    const r = await cliAsync('publish', '--broker', broker.url, '--live', files.live, '--plan', files.plan, '--event', 'cli trial');
    expect(r.status).toBe(0);
    const plan = await loadPlan(files.plan);
    const live = (await readTracks(files.live, plan)).tracks;
    const messages = live.reduce((s, t) => s + 2 + Math.ceil(t.t.length / 50), 0);
    expect(r.stderr).toContain(`in ${messages} messages (0 already stored)`);
    const nc = await connectBroker(broker.url, 'cli test');
    try {
      const jsm = await ensureStreams(nc, { prefix: 'plumbline', event: 'cli trial' });
      expect((await jsm.streams.info(inputStream({ prefix: 'plumbline', event: 'cli trial' }))).state.messages).toBe(messages);
    } finally {
      await nc.close();
    }
    // Published again: the message ids make the broker store nothing twice.
    const again = await cliAsync('publish', '--broker', broker.url, '--live', files.live, '--plan', files.plan, '--event', 'cli trial');
    expect(again.stderr).toContain(`in ${messages} messages (${messages} already stored)`);
  }, 60_000);
});
