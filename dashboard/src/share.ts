/**
 * Structural sharing between two fetches of a run's detail: every part that did not change keeps
 * the previous object, so panels can tell "unchanged" by identity and skip redrawing (the envelope
 * changes only when the baseline is refitted, the scores only with a new judgement). Pure.
 */
import type { RunDetail } from '../../ingest/service/view.js';

/** Structural equality of JSON values (numbers compared with ===, so NaN never equals). */
export function sameJson(a: unknown, b: unknown): boolean {
  if (a === b) return true;
  if (typeof a !== 'object' || typeof b !== 'object' || a === null || b === null) return false;
  if (Array.isArray(a)) {
    if (!Array.isArray(b) || a.length !== b.length) return false;
    for (let i = 0; i < a.length; i++) if (!sameJson(a[i], b[i])) return false;
    return true;
  }
  if (Array.isArray(b)) return false;
  const ka = Object.keys(a);
  const kb = Object.keys(b);
  if (ka.length !== kb.length) return false;
  for (const k of ka) if (!sameJson((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k])) return false;
  return true;
}

const PARTS = ['raw', 'grid', 'smoothed', 'judged', 'texture', 'envelope', 'projection', 'scores', 'reference', 'log', 'channels'] as const;

/** `next` with every part equal to the one in `prev` replaced by prev's object (same run only). */
export function shareUnchanged(prev: RunDetail | undefined, next: RunDetail): RunDetail {
  if (!prev || prev.run.key !== next.run.key) return next;
  const out: Record<string, unknown> = { ...next };
  let all = sameJson(prev.run, next.run);
  if (all) out.run = prev.run;
  for (const k of PARTS) {
    if (sameJson(prev[k], next[k])) out[k] = prev[k];
    else all = false;
  }
  return all ? prev : (out as unknown as RunDetail);
}
