/**
 * Judging: what the worker (./assessor.ts) is asked and what its answers change. Baseline refits
 * (scheduled `refitDelayMs` after simulated tracks arrive, or at once at start), provisional
 * judgements of a run in flight (every `provisionalEvery` seconds of track time), the final
 * judgement of a closed run (journaled as its result), applying a result to the run, and
 * refreshing the sequential evidence. Every promise is tracked so `settle` can wait for them.
 */
import type { AssessResult } from './compute.js';
import type { EventLog } from './event-log.js';
import type { EventCore } from './event-state.js';
import type { EvidenceBook } from './evidence-book.js';
import type { JournalFaults } from './commit.js';
import { packTrack } from './fit-cache.js';
import { closeQualityWatch } from './quality-watch.js';
import { practicalRows, diagnosisRow, runReport, type RunReport } from '../report.js';
import { rawTrack, type StoredResult, type TrackState } from './tracks.js';
import type { Judgement } from './view.js';

export class Judging {
  private readonly inflight = new Set<Promise<unknown>>();
  private closed = false;

  constructor(
    private readonly core: EventCore,
    private readonly book: EvidenceBook,
    private readonly log: EventLog,
    private readonly faults: JournalFaults,
    private readonly refitDelayMs: number,
  ) {}

  /** A track was closed (journaled): a simulated one goes to the worker, a live one is judged. */
  runClosed(t: TrackState): void {
    const core = this.core;
    if (t.source === 'sim') {
      const v = core.vignettes.get(t.vignette);
      const raw = rawTrack(core.plan, t);
      try {
        core.journal.saveSimPacks([packTrack(t.id, t.lastSeq ?? 0, t.committedSeq, raw)]);
      } catch {
        // the points are committed; the pack is derived from them (a start without it reads the points)
      }
      // The worker keeps simulated tracks; the service keeps only the count.
      t.points.clear();
      t.times.clear();
      this.track(core.assessor.addSims(t.vignette, [raw]).then((n) => {
        if (v) v.sims = n;
        this.scheduleRefit(t.vignette);
      }));
    } else {
      closeQualityWatch(core, this.log, t);
      this.log.append('event', t.vignette, t.track, t.maxT, { text: `live run ${t.track} closed after ${t.points.size} points` });
      this.judgeFinal(t);
      core.changes$.next({ kind: 'run', key: t.key });
    }
  }

  private scheduleRefit(vignette: string): void {
    const v = this.core.vignettes.get(vignette);
    if (!v || v.fitTimer) return;
    v.fitTimer = setTimeout(() => {
      v.fitTimer = undefined;
      this.track(this.refit(vignette));
    }, this.refitDelayMs);
  }

  async refit(vignette: string): Promise<void> {
    const core = this.core;
    const v = core.vignettes.get(vignette);
    if (!v) return;
    v.status = 'fitting';
    core.changes$.next({ kind: 'vignette', id: vignette });
    const r = await core.assessor.fit(vignette);
    v.sims = r.sims;
    if (r.error || !r.summary) {
      v.status = r.sims === 0 ? 'waiting' : 'failed';
      v.reason = r.error;
      v.summary = undefined;
    } else {
      v.status = 'ready';
      v.reason = undefined;
      v.summary = r.summary;
      v.envelope = r.envelope;
      v.grid = r.grid ? Array.from(r.grid) : undefined;
      const M = v.grid?.length ?? 0;
      v.texture = r.texture?.map((c) => core.plan.channels.map((_, ci) => Array.from(c.subarray(ci * M, (ci + 1) * M))));
    }
    core.changes$.next({ kind: 'vignette', id: vignette });
    // Runs that waited for this baseline are judged now.
    for (const t of core.tracks.values()) {
      if (t.vignette !== vignette || t.source !== 'live') continue;
      if (t.closedAt !== undefined && !t.report) this.judgeFinal(t);
      else if (t.closedAt === undefined) {
        t.lastProvisionalT = Number.NEGATIVE_INFINITY;
        this.maybeProvisional(t);
      }
    }
  }

  maybeProvisional(t: TrackState): void {
    const core = this.core;
    const v = core.vignettes.get(t.vignette);
    if (v?.status !== 'ready' || t.closedAt !== undefined) return;
    if (t.maxT - t.lastProvisionalT < core.limits.provisionalEvery) return;
    t.lastProvisionalT = t.maxT;
    const raw = rawTrack(core.plan, t);
    this.track(
      core.assessor.assess(t.vignette, raw, 'provisional').then((r) => {
        if (!r || t.closedAt !== undefined) return; // superseded, or the final judgement owns the run now
        this.applyResult(t, r);
      }),
    );
  }

  judgeFinal(t: TrackState): void {
    const core = this.core;
    const v = core.vignettes.get(t.vignette);
    if (v?.status !== 'ready') {
      t.notJudged = `waiting for the baseline of ${t.vignette}`;
      return;
    }
    const raw = rawTrack(core.plan, t);
    this.track(
      core.assessor.assess(t.vignette, raw, 'final').then((r) => {
        if (!r) return;
        this.applyResult(t, r);
        const stored: StoredResult = { judgement: t.judgement as Judgement, report: t.report as RunReport, nullPValues: t.nullPValues, detail: t.detail, trail: t.trail, notJudged: t.notJudged };
        if (t.report) core.journal.saveResult(t.id, stored);
        this.book.addTimelinePoint(t, core.clock());
        this.refreshEvidence();
        core.changes$.next({ kind: 'combined' });
        // Holm's adjustment ties the vignettes' verdicts together: all of them may change.
        for (const id of core.vignettes.keys()) core.changes$.next({ kind: 'vignette', id });
      }),
    );
  }

  private applyResult(t: TrackState, r: AssessResult): void {
    const plan = this.core.plan;
    const a = r.assessment;
    if (!a) {
      t.notJudged = r.error;
      if (r.mode === 'final') {
        t.report = runReport(plan, { vignette: t.vignette, track: t.track, samples: r.samples, error: r.error });
      }
      this.core.changes$.next({ kind: 'run', key: t.key });
      return;
    }
    const res = a.result;
    t.notJudged = undefined;
    t.judgement = {
      kind: r.mode,
      upTo: r.upTo,
      pValues: { ...res.pValues },
      statistics: { ...res.live },
      simsUsed: a.simsUsed,
      components: res.model.eigenvalues.length,
      // A run in flight is partial by nature and its early prefixes are short: those two window
      // flags say nothing while it flies, so only final judgements carry them.
      flags: r.mode === 'final' ? [...a.flags] : a.flags.filter((f) => f !== 'partial' && f !== 'few-samples'),
      rms: r.rms ?? [],
      practical: r.practical ? practicalRows(r.practical) : undefined,
      diagnosis: r.diagnosis ? diagnosisRow(r.diagnosis) : undefined,
    };
    if (r.scoreCloud) t.trail = [...t.trail, [r.upTo, r.scoreCloud.run[0], r.scoreCloud.run[1]]];
    const M = a.active.length;
    const C = plan.channels.length;
    const lastObserved = r.upTo;
    t.detail = {
      smoothed: Array.from({ length: C }, (_, c) => Array.from(a.curve.subarray(c * M, (c + 1) * M))),
      judged: Array.from(a.active, (x) => x === 1),
      projection: r.projection
        ? {
            from: lastObserved,
            level: r.projection.level,
            mean: Array.from({ length: C }, (_, c) => Array.from(r.projection!.mean.subarray(c * M, (c + 1) * M))),
            lower: Array.from({ length: C }, (_, c) => Array.from(r.projection!.lower.subarray(c * M, (c + 1) * M))),
            upper: Array.from({ length: C }, (_, c) => Array.from(r.projection!.upper.subarray(c * M, (c + 1) * M))),
          }
        : undefined,
      scores: r.scoreCloud ? { sims: r.scoreCloud.sims, eigenvalues: r.scoreCloud.eigenvalues } : undefined,
      reference: { l2: Array.from(res.reference.l2), score: Array.from(res.reference.score), residual: Array.from(res.reference.residual) },
    };
    if (r.mode === 'final') {
      t.report = runReport(plan, { vignette: t.vignette, track: t.track, samples: r.samples, assessment: a, rms: r.rms, practical: r.practical, diagnosis: r.diagnosis });
      t.nullPValues = { l2: Array.from(res.nullPValues.l2), score: Array.from(res.nullPValues.score), residual: Array.from(res.nullPValues.residual) };
      this.book.forgetCombinations();
    }
    this.core.changes$.next({ kind: 'run', key: t.key });
  }

  /** Recompute the sequential evidence from every final run's p-values (per statistic and overall), in completion order. */
  refreshEvidence(): void {
    const runs = this.book.evidenceRuns();
    if (runs.length === 0) return;
    const core = this.core;
    this.track(
      core.assessor.evidence(runs, core.plan.analysis.alpha).then((e) => {
        this.book.evidence = e;
        core.changes$.next({ kind: 'combined' });
        for (const id of core.vignettes.keys()) core.changes$.next({ kind: 'vignette', id });
      }),
    );
  }

  /** Keep a promise until it settles; a failure is logged (never an unhandled rejection). */
  track<T>(p: Promise<T>): void {
    const q = p.catch((e: unknown) => {
      if (this.closed || this.faults.failed(e)) return; // a journal fault is shown as such; results are recomputed after a restart
      try {
        this.log.append('event', null, null, null, { text: `internal failure: ${e instanceof Error ? e.message : String(e)}` });
      } catch {
        // the journal failed too: never an unhandled rejection
      }
    });
    this.inflight.add(q);
    void q.finally(() => this.inflight.delete(q));
  }

  /** Wait until no judgement or fit is pending (tests, export after a replay). */
  async settle(timeoutMs = 60_000): Promise<void> {
    const until = Date.now() + timeoutMs;
    for (let i = 0; i < 10_000 && Date.now() < until; i++) {
      const timers = [...this.core.vignettes.values()].some((v) => v.fitTimer);
      if (this.inflight.size === 0 && !timers) return;
      await Promise.race([...this.inflight, new Promise((r) => setTimeout(r, 20))]);
    }
    throw new Error('settle: work still pending after the timeout');
  }

  shutdown(): void {
    this.closed = true;
    for (const v of this.core.vignettes.values()) if (v.fitTimer) clearTimeout(v.fitTimer);
  }
}
