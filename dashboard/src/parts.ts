/**
 * Small template pieces shared by the panels (status words with their shapes). Plain functions that
 * return lit templates: all text goes through text bindings.
 */
import { html, nothing, type TemplateResult } from 'lit';
import { formatP, formatT } from './format.js';
import type { RunView, VignetteView } from './model.js';

/**
 * A p-value with its second cues: ◆/● filled when final, ◇/○ hollow and italic with the word
 * "provisional" while the run is in flight; diamond when p ≤ α, circle when p > α.
 */
export function pValue(p: number | undefined, kind: 'provisional' | 'final' | undefined, alpha: number, options: { count?: string; compact?: boolean } = {}): TemplateResult {
  if (p === undefined || kind === undefined) return html`<span class="p none muted">—</span>`;
  const low = p <= alpha;
  const mark = kind === 'final' ? (low ? '◆' : '●') : low ? '◇' : '○';
  const title = `${kind} p-value ${p}${options.count ? ` (${options.count})` : ''}; ${low ? 'p ≤ α' : 'p > α'} (α = ${alpha})`;
  return html`<span class="p ${kind} ${low ? 'low' : 'high'}" title=${title} data-kind=${kind} data-value=${String(p)}
    ><span class="mark" aria-hidden="true">${mark}</span><span class="value num">${formatP(p)}</span>${kind === 'provisional' ? html`<span class="word">provisional</span>` : nothing}${options.compact
      ? nothing
      : html`<span class="sr-only">${low ? 'at or below alpha' : 'above alpha'}</span>`}</span
  >`;
}

/** "5 of 41": how many of the N + 1 runs were at least as extreme (p·(N + 1)). */
export function rankText(p: number, sims: number): string {
  const n = sims + 1;
  return `${Math.round(p * n)} of ${n} runs as extreme or more`;
}

/** Baseline status: shape + word (+ numbers). */
export function baselineStatus(v: VignetteView): TemplateResult {
  const b = v.baseline;
  switch (b.status) {
    case 'waiting':
      return html`<span class="status st-waiting"><span aria-hidden="true">○</span> waiting for simulated runs</span>`;
    case 'fitting':
      return html`<span class="status st-busy"><span aria-hidden="true">◔</span> fitting${b.sims ? html` ${b.sims} sims` : nothing}…</span>`;
    case 'ready':
      return html`<span class="status st-ok"
        ><span aria-hidden="true">●</span> ready · <span class="num">${b.sims}</span> sims · <span class="num">${b.components ?? '?'}</span> comp.${b.varianceExplained !== undefined
          ? html` (<span class="num">${Math.round(b.varianceExplained * 100)}</span> % var.)`
          : nothing}</span
      >`;
    case 'failed':
      return html`<span class="status st-failed" title=${b.reason ?? ''}><span aria-hidden="true">✕</span> failed: ${b.reason ?? 'no reason given'}</span>`;
  }
}

/** Live status of a run: shape + word + track time (on two lines when `stacked`). */
export function liveStatus(r: RunView, horizon: number, stacked = false): TemplateResult {
  const sep = stacked ? html`<br />` : ' ';
  if (r.status === 'in-flight') {
    const frac = Math.max(0, Math.min(1, r.lastT / horizon));
    return html`<span class="status st-flight"
      ><span aria-hidden="true">▶</span> in flight${sep}<span class="num">${formatT(r.lastT)}</span><span class="muted"> / ${horizon} s</span>
      <span class="bar" aria-hidden="true"><span style="width:${(frac * 100).toFixed(1)}%"></span></span
    ></span>`;
  }
  return html`<span class="status st-done"><span aria-hidden="true">■</span> complete${sep}<span class="num muted">${formatT(r.lastT)}</span></span>`;
}
