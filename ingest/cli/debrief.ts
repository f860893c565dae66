/**
 * The debrief: a self-contained HTML page (no scripts, no outside resources) written from an
 * assessment document — `plumbline assess --out`, or the live service's /api/export. It carries the
 * verdicts, the evidence, the practical differences, the diagnoses, the event log and the cautions.
 * Every text from outside (ids, labels, notes) is escaped.
 */
import type { AssessmentReport } from '../report.js';

export function escapeHtml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c] as string);
}

function p(x: number | undefined): string {
  if (x === undefined || !Number.isFinite(x)) return '—';
  return x < 0.001 ? x.toExponential(1) : x.toFixed(3);
}

function num(x: number | undefined, digits = 1): string {
  return x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(digits);
}

function rows(cells: string[][]): string {
  return cells.map((r) => `<tr>${r.map((c) => `<td>${c}</td>`).join('')}</tr>`).join('\n');
}

function table(head: string[], body: string[][], caption: string): string {
  return `<table><caption>${escapeHtml(caption)}</caption><thead><tr>${head.map((h) => `<th scope="col">${escapeHtml(h)}</th>`).join('')}</tr></thead><tbody>\n${rows(body)}\n</tbody></table>`;
}

const STYLE = `
body { font: 15px/1.45 system-ui, sans-serif; margin: 2rem auto; max-width: 70rem; color: #1d2733; padding: 0 1rem; }
h1 { font-size: 1.6rem; margin-bottom: .2rem; } h2 { margin-top: 2rem; border-bottom: 2px solid #c9d3dd; }
.cautions { border-left: 6px solid #b35c00; background: #fff6ec; padding: .6rem 1rem; }
table { border-collapse: collapse; margin: 1rem 0; width: 100%; font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding-bottom: .3rem; }
th, td { border-bottom: 1px solid #dde3ea; padding: .25rem .5rem; text-align: left; vertical-align: top; }
th { background: #eef2f6; }
.yes { font-weight: 700; } .yes::before { content: '▲ '; } .no::before { content: '○ '; }
.muted { color: #5b6875; }
`;

export function renderDebrief(report: AssessmentReport, title = 'Debrief'): string {
  const channels = report.plan.channels;
  const verdict = (v: string) => (v === 'distinguishable' ? `<span class="yes">${v}</span>` : `<span class="no">${escapeHtml(v)}</span>`);
  const seq = report.sequential;
  const comb = report.combined;
  const summary: string[] = [];
  if (seq) {
    summary.push(`<p><strong>Anytime-valid evidence</strong> (valid however runs were added or stopped): ${num(seq.evidence, 2)} against a threshold of ${num(seq.threshold, 0)} — ${seq.established ? `<span class="yes">discrepancy established</span>${seq.crossedAt ? ` at run ${seq.crossedAt}` : ''}` : '<span class="no">not established</span>'}.</p>`);
    summary.push(`<p>${escapeHtml(seq.advice)}</p>`);
  }
  if (comb) {
    summary.push(`<p><strong>Fixed-sample ${escapeHtml(comb.method)} combination</strong> of ${comb.count} runs: p = ${p(comb.pValue)} (${comb.distinguishable ? 'below' : 'above'} alpha = ${comb.alpha}). Valid only if the number of runs was fixed before the event.</p>`);
  }
  const vignettes = table(
    ['vignette', 'condition', 'simulated runs', 'components', 'live runs', 'p (combined)', 'p (Holm)', 'verdict', 'evidence', 'advice'],
    report.vignettes.map((v) => {
      const e = seq?.vignettes.find((x) => x.id === v.id);
      return [
        escapeHtml(v.id),
        escapeHtml(v.label ?? ''),
        String(v.model?.sims ?? '—'),
        v.model ? `${v.model.components} (${(100 * v.model.varianceExplained).toFixed(1)} %)` : escapeHtml(v.reason ?? '—'),
        String(v.runs),
        p(v.combined?.pValue),
        p(v.adjustedPValue),
        verdict(v.verdict),
        e ? `${num(e.evidence, 2)}${e.established ? ' <span class="yes">established</span>' : ''}` : '—',
        e ? `<span class="muted">${escapeHtml(e.advice)}</span>` : '—',
      ];
    }),
    'Per vignette (verdicts use Holm’s adjustment over the vignettes)',
  );
  const runs = table(
    ['vignette', 'run', 'flags', 'p (L2)', 'p (score)', 'p (residual)', 'p (overall)', 'kind of discrepancy', ...channels.map((c) => `${c.name}: largest deviation, time outside 95 % band, within tolerance`)],
    report.runs.map((r) => [
      escapeHtml(r.vignette),
      escapeHtml(r.track),
      escapeHtml(r.flags.join(', ')),
      p(r.statistics?.l2.pValue),
      p(r.statistics?.score.pValue),
      p(r.statistics?.residual.pValue),
      r.status === 'assessed' ? `<strong>${p(r.overall?.pValue)}</strong>` : `not judged: ${escapeHtml(r.reason ?? '')}`,
      r.diagnosis ? `${escapeHtml(r.diagnosis.kind)}${r.diagnosis.timeShift !== undefined ? ` (${num(r.diagnosis.timeShift)} s)` : ''}<br><span class="muted">${escapeHtml(r.diagnosis.reason)}</span>` : '—',
      ...channels.map((c) => {
        const d = r.practical?.find((x) => x.channel === c.name);
        if (!d) return '—';
        const tol = d.withinTolerance === undefined ? 'no tolerance' : d.withinTolerance ? 'within' : '<span class="yes">beyond</span>';
        return `${num(d.maxDeviation)} ${escapeHtml(c.unit)} at ${num(d.maxDeviationAt, 0)} s; ${num(d.timeOutside, 0)} s; ${tol}`;
      }),
    ]),
    'Per live run (statistically distinguishable and practically within tolerance are separate answers)',
  );
  const log = report.log && report.log.length > 0
    ? table(
        ['time (UTC)', 'kind', 'run', 'track time (s)', 'text', 'by'],
        report.log.filter((e) => e.kind !== 'event').map((e) => [
          new Date(e.at).toISOString().replace('T', ' ').slice(0, 19),
          escapeHtml(e.kind),
          escapeHtml([e.vignette, e.track].filter(Boolean).join('/')),
          num(e.t),
          escapeHtml(e.text),
          escapeHtml(e.author ?? ''),
        ]),
        'Notes and data-quality flags',
      )
    : '<p class="muted">No notes or flags were logged.</p>';
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>${escapeHtml(title)}: ${escapeHtml(report.plan.name)}</title>
<meta name="viewport" content="width=device-width, initial-scale=1"><style>${STYLE}</style></head>
<body>
<h1>${escapeHtml(title)}: ${escapeHtml(report.plan.name)}</h1>
<p class="muted">plumbline assessment document v${report.version}; alpha ${report.plan.alpha}; components ${escapeHtml(JSON.stringify(report.plan.components))}; channels ${channels.map((c) => `${escapeHtml(c.name)} (${escapeHtml(c.unit)})`).join(', ')}.</p>
<div class="cautions" role="note"><strong>Cautions</strong><ul>${report.cautions.map((c) => `<li>${escapeHtml(c)}</li>`).join('')}</ul></div>
<h2>Summary</h2>
${summary.join('\n')}
<h2>Vignettes</h2>
${vignettes}
<h2>Live runs</h2>
${runs}
<h2>Event log</h2>
${log}
<h2>Method</h2>
<p>Each track is smoothed by a P-spline with the smoothing parameter chosen by GCV; each live run is compared with its vignette's simulated runs, on the part of the horizon it observed, by its L2 distance from the mean track, its Mahalanobis distance on the leading functional principal component scores and the residual those components miss. The live run and the simulated runs are judged in one model fitted to all of them (full conformal calibration), so each rank p-value is exactly valid; the overall p-value is the calibrated minimum of the three. Evidence across runs is combined by Fisher's method (fixed run count) and by test martingales (anytime-valid).</p>
</body></html>
`;
}
