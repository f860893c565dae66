/**
 * Main-thread side of the computation worker: a small scheduler.
 *
 * - Ordered work (simulated tracks, baseline fits, final judgements) runs first-in first-out, so
 *   a fit always sees the tracks sent before it; a fit already waiting for a vignette is not queued
 *   twice (callers share its result).
 * - Provisional judgements of runs in flight wait until no ordered work is pending, and only the
 *   newest request per run is kept: an older one that never started resolves to `undefined`.
 * One request is in the worker at a time. With `inProcess` the same code runs on the calling
 * thread (used by tests that need no worker).
 */
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { RawTrack } from '../../engine/types.js';
import type { StreamRun } from '../../engine/evidence/index.js';
import { Compute, type AssessResult, type ComputeConfig, type EvidenceResult, type FitResult } from './compute.js';
import type { FitCacheEntry, FitCacheStore } from './fit-cache.js';

export type WorkerRequest =
  | { kind: 'sims'; id: number; vignette: string; tracks: RawTrack[] }
  | { kind: 'fit'; id: number; vignette: string; cached?: FitCacheEntry }
  | { kind: 'assess'; id: number; vignette: string; run: RawTrack; mode: 'final' | 'provisional' }
  | { kind: 'evidence'; id: number; runs: StreamRun[]; alpha: number };

export type WorkerReply =
  | { kind: 'sims'; id: number; vignette: string; count: number }
  | { kind: 'fit'; id: number; result: FitResult }
  | { kind: 'assess'; id: number; result: AssessResult }
  | { kind: 'evidence'; id: number; result: EvidenceResult }
  | { kind: 'failed'; id: number; message: string };

interface Job {
  readonly request: WorkerRequest;
  readonly transfer?: ArrayBuffer[];
  readonly resolve: (reply: WorkerReply | undefined) => void;
  readonly reject: (error: Error) => void;
}

type Distributive<T> = T extends unknown ? Omit<T, 'id'> : never;

export class Assessor {
  private readonly worker?: Worker;
  private readonly local?: Compute;
  private readonly ordered: Job[] = [];
  private readonly provisional = new Map<string, Job>();
  private readonly pendingFits = new Map<string, Promise<FitResult>>();
  private busy?: Job;
  private nextId = 1;
  private failure?: Error;
  private readonly cache?: FitCacheStore;

  /**
   * With `cache`, every fit first offers the computation the vignette's stored entry of the fit
   * cache (used when its content key matches) and stores the entry of every fresh fit.
   */
  constructor(config: ComputeConfig, options: { inProcess?: boolean; cache?: FitCacheStore } = {}) {
    this.cache = options.cache;
    if (options.inProcess) {
      this.local = new Compute(config);
      return;
    }
    const source = import.meta.url.endsWith('.ts');
    const url = new URL(`./compute-worker${source ? '.ts' : '.js'}`, import.meta.url);
    if (source) {
      // Running from TypeScript sources (tests, tsx): load the worker through tsx's loader.
      const api = pathToFileURL(createRequire(import.meta.url).resolve('tsx/esm/api').replace(/\.cjs$/, '.mjs')).href;
      const boot = `import(${JSON.stringify(api)}).then((m) => { m.register(); return import(${JSON.stringify(url.href)}); });`;
      this.worker = new Worker(boot, { eval: true, workerData: config });
    } else {
      this.worker = new Worker(url, { workerData: config });
    }
    this.worker.on('message', (reply: WorkerReply) => this.finish(reply));
    this.worker.on('error', (e) => this.fail(e instanceof Error ? e : new Error(String(e))));
    this.worker.on('exit', (code) => {
      if (code !== 0) this.fail(new Error(`computation worker exited with code ${code}`));
    });
  }

  get broken(): Error | undefined {
    return this.failure;
  }

  /**
   * Hand simulated tracks to the computation. With a worker, each track is copied into one buffer
   * of its exact size (times, then each channel) that is moved, not copied, to the worker: the
   * caller's arrays are left as they were and the worker holds one compact copy.
   */
  addSims(vignette: string, tracks: RawTrack[]): Promise<number> {
    const sent = this.worker ? tracks.map(compactTrack) : tracks;
    const transfer = this.worker ? sent.map((t) => t.t.buffer as ArrayBuffer) : undefined;
    return this.enqueue({ kind: 'sims', vignette, tracks: sent }, transfer).then((r) => (r?.kind === 'sims' ? r.count : 0));
  }

  fit(vignette: string): Promise<FitResult> {
    const waiting = this.pendingFits.get(vignette);
    if (waiting) return waiting;
    const cached = this.cache?.read(vignette);
    const p = this.enqueue({ kind: 'fit', vignette, cached }).then((r) => {
      if (r?.kind !== 'fit') throw new Error('fit: unexpected reply');
      const { cache, ...result } = r.result;
      if (cache?.hit) this.cache?.note(`fit of vignette ${vignette} loaded from the fit cache (${result.ms.toFixed(0)} ms)`);
      else if (cache) {
        if (cache.rejected) this.cache?.note(`fit cache of vignette ${vignette} is ${cache.rejected}; refitted`);
        if (cache.entry) this.cache?.write(vignette, cache.entry);
      }
      return { ...result, cache: cache?.hit ? cache : undefined };
    });
    // A fit still waiting in the queue is shared by later requests; one the worker has already
    // started (enqueue starts it at once when the worker is idle) is not, or a refit after more
    // simulated runs arrive would get this older result.
    if (this.ordered.some((j) => j.request.kind === 'fit' && j.request.vignette === vignette)) this.pendingFits.set(vignette, p);
    return p;
  }

  /** Final judgements are ordered; provisional ones are conflated per run (may resolve undefined). */
  assess(vignette: string, run: RawTrack, mode: 'final' | 'provisional'): Promise<AssessResult | undefined> {
    const request = { kind: 'assess' as const, vignette, run, mode };
    const p = mode === 'final' ? this.enqueue(request) : this.enqueueProvisional(`${vignette}\u0000${run.track}`, request);
    return p.then((r) => (r?.kind === 'assess' ? r.result : undefined));
  }

  /** Evidence and advice from final p-values in completion order (ordered work). */
  evidence(runs: StreamRun[], alpha: number): Promise<EvidenceResult> {
    return this.enqueue({ kind: 'evidence', runs, alpha }).then((r) => {
      if (r?.kind !== 'evidence') throw new Error('evidence: unexpected reply');
      return r.result;
    });
  }

  /** Pending work, for the state view and tests. */
  get queued(): { ordered: number; provisional: number; busy: boolean } {
    return { ordered: this.ordered.length, provisional: this.provisional.size, busy: this.busy !== undefined };
  }

  async close(): Promise<void> {
    this.fail(new Error('assessor closed'));
    await this.worker?.terminate();
  }

  private enqueue(request: Distributive<WorkerRequest>, transfer?: ArrayBuffer[]): Promise<WorkerReply | undefined> {
    return new Promise((resolve, reject) => {
      if (this.failure) return reject(this.failure);
      this.ordered.push({ request: { ...request, id: this.nextId++ } as WorkerRequest, transfer, resolve, reject });
      this.pump();
    });
  }

  private enqueueProvisional(key: string, request: Distributive<WorkerRequest>): Promise<WorkerReply | undefined> {
    return new Promise((resolve, reject) => {
      if (this.failure) return reject(this.failure);
      this.provisional.get(key)?.resolve(undefined);
      this.provisional.set(key, { request: { ...request, id: this.nextId++ } as WorkerRequest, resolve, reject });
      this.pump();
    });
  }

  private pump(): void {
    if (this.busy || this.failure) return;
    let job = this.ordered.shift();
    if (!job) {
      const first = this.provisional.entries().next();
      if (first.done) return;
      this.provisional.delete(first.value[0]);
      job = first.value[1];
    }
    this.busy = job;
    if (job.request.kind === 'fit') this.pendingFits.delete(job.request.vignette);
    if (this.worker) {
      this.worker.postMessage(job.request, job.transfer);
    } else {
      const req = job.request;
      // In-process: run on a later turn so callers see the same asynchrony as with the worker.
      setImmediate(() => {
        try {
          this.finish(this.runLocal(req));
        } catch (e) {
          this.finish({ kind: 'failed', id: req.id, message: e instanceof Error ? (e.stack ?? e.message) : String(e) });
        }
      });
    }
  }

  private runLocal(req: WorkerRequest): WorkerReply {
    const c = this.local as Compute;
    switch (req.kind) {
      case 'sims':
        return { kind: 'sims', id: req.id, vignette: req.vignette, count: c.addSims(req.vignette, req.tracks) };
      case 'fit':
        return { kind: 'fit', id: req.id, result: c.fit(req.vignette, req.cached) };
      case 'assess':
        return { kind: 'assess', id: req.id, result: c.assess(req.vignette, req.run, req.mode) };
      case 'evidence':
        return { kind: 'evidence', id: req.id, result: c.evidence(req.runs, req.alpha) };
    }
  }

  private finish(reply: WorkerReply): void {
    const job = this.busy;
    this.busy = undefined;
    if (job) {
      if (reply.kind === 'failed') job.reject(new Error(`computation failed: ${reply.message}`));
      else job.resolve(reply);
    }
    this.pump();
  }

  private fail(error: Error): void {
    if (this.failure) return;
    this.failure = error;
    const all = [...(this.busy ? [this.busy] : []), ...this.ordered, ...this.provisional.values()];
    this.busy = undefined;
    this.ordered.length = 0;
    this.provisional.clear();
    for (const j of all) j.reject(error);
  }
}

/** A track's times and values copied into one buffer of their exact size (views on it). */
function compactTrack(t: RawTrack): RawTrack {
  const n = t.t.length;
  const all = new Float64Array(n * (1 + t.values.length));
  all.set(t.t, 0);
  t.values.forEach((v, c) => all.set(v, (c + 1) * n));
  return { vignette: t.vignette, track: t.track, t: all.subarray(0, n), values: t.values.map((_, c) => all.subarray((c + 1) * n, (c + 2) * n)) };
}
