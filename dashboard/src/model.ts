/**
 * The dashboard's view model: the immutable snapshot the store publishes, and the pure functions the
 * panels share (run order for the overview and keyboard navigation, status words). Types of the
 * server's JSON come from ingest/service/view.ts, as types only.
 */
import type { EventView, LogEntryView, RunDetail, RunView, VignetteView } from '../../ingest/service/view.js';

export type { EventView, LogEntryView, RunDetail, RunView, VignetteView };

export type ConnectionState =
  | { readonly status: 'connecting'; readonly attempt: number }
  | { readonly status: 'open'; readonly since: number }
  | { readonly status: 'waiting'; readonly attempt: number; readonly retryAt: number; readonly reason: string };

/** What every panel renders from. A new object per published frame; unchanged parts keep their identity. */
export interface ViewState {
  readonly connection: ConnectionState;
  /** The event as last received (snapshot plus deltas); undefined before the first snapshot. */
  readonly event?: EventView;
  /** Key ("vignette/track") of the selected live run. */
  readonly selected?: string;
  /** The selected run's detail, when fetched (it may belong to a previous selection while loading). */
  readonly detail?: RunDetail;
  readonly detailError?: string;
  /** Client clock (ms) when the last server message arrived. */
  readonly lastMessageAt?: number;
}

export type SortMode = 'plan' | 'p' | 'time';

export const SORT_LABELS: Record<SortMode, string> = {
  plan: 'plan order',
  p: 'p-value (smallest first)',
  time: 'latest run first',
};

export interface VignetteGroup {
  readonly vignette: VignetteView;
  readonly runs: readonly RunView[];
}

const pOf = (r: RunView): number => r.judgement?.pValues.overall ?? Number.POSITIVE_INFINITY;

/**
 * Vignettes with their live runs, in the chosen order. Runs inside a vignette follow the same rule;
 * a vignette sorts by its smallest p-value (p) or its latest run (time); vignettes without runs last.
 */
export function groupRuns(event: EventView | undefined, sort: SortMode): VignetteGroup[] {
  if (!event) return [];
  const byVignette = new Map<string, RunView[]>();
  for (const r of event.runs) {
    if (r.source !== 'live') continue;
    const list = byVignette.get(r.vignette);
    if (list) list.push(r);
    else byVignette.set(r.vignette, [r]);
  }
  const runOrder = (a: RunView, b: RunView): number => {
    if (sort === 'p') return pOf(a) - pOf(b) || a.openedAt - b.openedAt;
    if (sort === 'time') return b.openedAt - a.openedAt;
    return a.openedAt - b.openedAt || (a.track < b.track ? -1 : 1);
  };
  const groups = event.vignettes.map((vignette, index) => ({ vignette, index, runs: [...(byVignette.get(vignette.id) ?? [])].sort(runOrder) }));
  const key = (g: (typeof groups)[number]): number => {
    if (g.runs.length === 0) return Number.POSITIVE_INFINITY;
    if (sort === 'p') return Math.min(...g.runs.map(pOf));
    if (sort === 'time') return -Math.max(...g.runs.map((r) => r.openedAt));
    return g.index;
  };
  if (sort !== 'plan') groups.sort((a, b) => key(a) - key(b) || a.index - b.index);
  return groups.map(({ vignette, runs }) => ({ vignette, runs }));
}

/** The run keys in display order (what j/k and the arrow keys walk through). */
export function runOrder(event: EventView | undefined, sort: SortMode): string[] {
  return groupRuns(event, sort).flatMap((g) => g.runs.map((r) => r.key));
}

/** The key `step` places from `current` in `order` (clamped at the ends; the first when none). */
export function stepSelection(order: readonly string[], current: string | undefined, step: number): string | undefined {
  if (order.length === 0) return undefined;
  const i = current === undefined ? -1 : order.indexOf(current);
  if (i < 0) return step >= 0 ? order[0] : order[order.length - 1];
  return order[Math.max(0, Math.min(order.length - 1, i + step))];
}

export const runKey = (vignette: string, track: string): string => `${vignette}/${track}`;

/** Judged against alpha: the words and the shape that go with the colour. */
export function verdict(p: number | undefined, alpha: number): { readonly word: string; readonly cls: 'low' | 'high' | 'none' } {
  if (p === undefined || !Number.isFinite(p)) return { word: 'not judged', cls: 'none' };
  return p <= alpha ? { word: `p ≤ α: distinguishable`, cls: 'low' } : { word: `p > α`, cls: 'high' };
}

/** Log entries newest first, without duplicates (by id). */
export function newestFirst(log: readonly LogEntryView[]): LogEntryView[] {
  return [...log].sort((a, b) => b.id - a.id);
}
