/**
 * Acceptance: what of a producer's `open` and `points` messages a track takes. `resolveOpen` checks
 * the vignette and the channels against the plan and an existing track; `stagePoints` checks every
 * point of a `points` message (value count, finite, duplicates and conflicts, horizon, time
 * reversal beyond the tolerance, duplicate time) and stages the good ones on the track. Refusals
 * carry a stable code per point; a refused point never touches what was accepted before it.
 * Nothing here writes the journal: staged points are committed by ./commit.ts.
 */
import type { EventPlan } from '../plan.js';
import type { ServiceLimits } from './limits.js';
import { errorReply, type ErrorCode, type OpenMessage, type PointsMessage, type ServerReply } from './protocol.js';
import { keyOf, type StagedPoint, type TrackState } from './tracks.js';

export type OpenDecision =
  /** Answer at once (an error, or the existing track's state). */
  | { readonly kind: 'reply'; readonly reply: ServerReply }
  /** A new track: `order` maps the producer's value positions to plan channels. */
  | { readonly kind: 'new'; readonly order: number[] };

export function resolveOpen(plan: EventPlan, existing: TrackState | undefined, msg: OpenMessage): OpenDecision {
  const pv = plan.vignettes.find((v) => v.id === msg.vignette);
  if (!pv) return { kind: 'reply', reply: errorReply('UNKNOWN_VIGNETTE', `vignette "${msg.vignette}" is not in the plan (${plan.vignettes.map((v) => v.id).join(', ')})`, msg.id) };
  const names = plan.channels.map((c) => c.name);
  const order = msg.channels.map((c) => names.indexOf(c));
  if (msg.channels.length !== names.length || order.some((i) => i < 0) || new Set(order).size !== order.length) {
    return { kind: 'reply', reply: errorReply('CHANNELS_MISMATCH', `channels [${msg.channels.join(', ')}] do not match the plan's [${names.join(', ')}]`, msg.id) };
  }
  if (existing) {
    if (existing.source !== msg.source || existing.order.join() !== order.join()) {
      return { kind: 'reply', reply: errorReply('TRACK_CONFLICT', `track ${existing.key} exists as a ${existing.source} track with channels [${existing.order.map((i) => names[i]).join(', ')}]`, msg.id) };
    }
    return { kind: 'reply', reply: { v: 1, type: 'opened', id: msg.id, vignette: msg.vignette, track: msg.track, committedSeq: existing.committedSeq, closed: existing.closedAt !== undefined } };
  }
  return { kind: 'new', order };
}

export interface Staging {
  readonly staged: StagedPoint[];
  readonly rejected: Array<{ seq: number; code: ErrorCode; reason: string }>;
  readonly duplicates: number;
}

/** The whole message refused (no such track, or closed), or undefined when its points may be checked. */
export function refuseMessage(t: TrackState | undefined, msg: PointsMessage): ServerReply | undefined {
  if (!t) return errorReply('TRACK_NOT_OPEN', `track ${keyOf(msg.vignette, msg.track)} was never opened; send "open" first`, msg.id);
  if (t.closedAt !== undefined) return errorReply('TRACK_CLOSED', `track ${t.key} is closed`, msg.id);
  return undefined;
}

/** Check each point against the track and stage the good ones (in `t.pending`, `t.maxT` advanced). */
export function stagePoints(plan: EventPlan, limits: ServiceLimits, t: TrackState, msg: PointsMessage): Staging {
  const horizon = plan.vignettes.find((v) => v.id === t.vignette)?.horizon ?? Number.POSITIVE_INFINITY;
  const C = plan.channels.length;
  const staged: StagedPoint[] = [];
  const rejected: Staging['rejected'] = [];
  let duplicates = 0;
  const reject = (seq: number, code: ErrorCode, reason: string) => rejected.push({ seq, code, reason });
  for (const p of msg.points) {
    const stored = t.points.indexOf(p.seq);
    const prior = stored >= 0 ? undefined : t.pending.get(p.seq);
    const values = new Float64Array(C);
    let bad: string | undefined;
    if (p.values.length !== C) {
      reject(p.seq, 'WRONG_VALUE_COUNT', `point ${p.seq} has ${p.values.length} values; the track has ${C} channels`);
      continue;
    }
    for (let i = 0; i < C; i++) {
      const x = p.values[i];
      if (!Number.isFinite(x)) bad = `value ${i} of point ${p.seq} is not finite`;
      values[t.order[i]] = x;
    }
    if (bad) {
      reject(p.seq, 'NOT_FINITE', bad);
      continue;
    }
    if (stored >= 0 || prior) {
      const same = prior ? prior.t === p.t && prior.values.every((x, i) => x === values[i]) : t.points.same(p.seq, p.t, values);
      if (same) duplicates++;
      else reject(p.seq, 'DUPLICATE_CONFLICT', `sequence number ${p.seq} was already accepted with other data (t = ${prior ? prior.t : t.points.tAt(stored)})`);
      continue;
    }
    if (p.t > horizon) {
      reject(p.seq, 'BEYOND_HORIZON', `t = ${p.t} s is beyond the ${horizon} s horizon of ${t.vignette}`);
      continue;
    }
    if (p.t < t.maxT - limits.timeReversalTolerance) {
      reject(p.seq, 'TIME_REVERSED', `t = ${p.t} s is ${(t.maxT - p.t).toFixed(3)} s before the latest point (t = ${t.maxT} s); the tolerance is ${limits.timeReversalTolerance} s`);
      continue;
    }
    if (t.times.has(p.t) || t.pendingTimes.has(p.t)) {
      reject(p.seq, 'DUPLICATE_TIME', `another point of ${t.key} has t = ${p.t} s`);
      continue;
    }
    const sp: StagedPoint = { trackId: t.id, seq: p.seq, t: p.t, values };
    t.pending.set(p.seq, sp);
    t.pendingTimes.add(p.t);
    if (p.t > t.maxT) t.maxT = p.t;
    staged.push(sp);
  }
  return { staged, rejected, duplicates };
}
