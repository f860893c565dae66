/**
 * The debrief report: one self-contained HTML file (inline CSS and SVG; no script, no outside URL,
 * no web font) that prints cleanly to PDF, one run per page. Order: the one-page summary, the
 * per-vignette verdicts, one section per run, the data-quality table, the notes, the methods in
 * plain words with their published sources, and the cautions. Every text from outside (plan
 * names, labels, run ids, notes, flags, reasons) goes through `escapeHtml`.
 *
 * Colours meet WCAG 2.1 AA contrast (4.5:1 for text) on screen and in print; colour is never the
 * only cue (verdicts carry a word and a mark).
 */
import { PALETTE } from '../palette.js';
import type { AssessmentReport, RunReport } from '../report.js';
import type { RunDetail } from '../service/view.js';
import { envelopeChart, evidenceChart, histogramChart, scoreChart, type Chart } from './charts.js';
import { METHOD_NAMES, STATISTIC_NAMES, type EventHeadline } from './headline.js';
import type { DebriefResults } from './results-schema.js';
import { runKey } from './keys.js';
import type { DebriefInput } from './source.js';

export function escapeHtml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c] as string);
}

const e = escapeHtml;

export function formatP(x: number | undefined): string {
  if (x === undefined || !Number.isFinite(x)) return '—';
  return x < 0.001 ? x.toExponential(1) : x.toFixed(3);
}

function num(x: number | undefined, digits = 1): string {
  return x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(digits);
}

function utc(ms: number): string {
  return new Date(ms).toISOString().replace('T', ' ').slice(0, 19);
}

function table(head: readonly string[], body: ReadonlyArray<readonly string[]>, caption: string, cls = ''): string {
  return `<table${cls ? ` class="${cls}"` : ''}><caption>${e(caption)}</caption><thead><tr>${head.map((h) => `<th scope="col">${e(h)}</th>`).join('')}</tr></thead><tbody>
${body.map((r) => `<tr>${r.map((c) => `<td>${c}</td>`).join('')}</tr>`).join('\n')}
</tbody></table>`;
}

function figure(chart: Chart | undefined, caption: string, cls = ''): string {
  if (!chart) return '';
  return `<figure${cls ? ` class="${cls}"` : ''}>${chart.svg.replace('<svg ', `<svg aria-label="${e(chart.description)}" `)}<figcaption>${e(caption)}</figcaption></figure>`;
}

const verdictCell = (v: string) =>
  v === 'distinguishable' ? `<span class="verdict yes">▲ distinguishable</span>` : v === 'not distinguishable' ? `<span class="verdict no">○ not distinguishable</span>` : `<span class="verdict">– ${e(v)}</span>`;

/** The plan's analysis settings in words. */
export function settingsInWords(plan: AssessmentReport['plan']): string[] {
  const c = plan.components;
  const comps = 'varianceFraction' in c
    ? `as many principal components as explain ${num(100 * c.varianceFraction, 0)} % of the simulated runs' variance`
    : `${c.fixed} principal component${c.fixed === 1 ? '' : 's'}`;
  return [
    `Significance level α = ${plan.alpha}: a p-value at or below ${plan.alpha} counts as distinguishable.`,
    `Each run is compared on ${comps}.`,
    `Tracks are smoothed with ${plan.segments} spline segments and compared on a grid of ${plan.gridSize} points.`,
    `Runs are combined by ${METHOD_NAMES[plan.combination]}; the vignettes' verdicts use Holm's adjustment.`,
    `Channels: ${plan.channels.map((ch) => `${ch.name} (${ch.unit})`).join(', ')}.`,
  ];
}

const STYLE = `
:root { color-scheme: light; }
body { font: 14px/1.45 "Liberation Sans", Arial, Helvetica, sans-serif; margin: 1.5rem auto; max-width: 60rem; color: ${PALETTE.ink}; background: ${PALETTE.panel}; padding: 0 1rem; }
h1 { font-size: 1.55rem; margin: 0 0 .2rem; } h2 { font-size: 1.2rem; margin: 1.6rem 0 .4rem; border-bottom: 2px solid #c4ccd6; }
h3 { font-size: 1.05rem; margin: 1rem 0 .3rem; }
p { margin: .35rem 0; }
.generated, .muted { color: ${PALETTE.muted}; }
.status { border: 2px solid ${PALETTE.ink}; padding: .4rem .7rem; margin: .6rem 0; font-weight: 700; }
.status.unfinished { border-color: ${PALETTE.lowText}; background: #fff3e8; }
.cautions { border-left: 6px solid ${PALETTE.lowText}; background: #fff6ec; padding: .4rem 1rem; margin: .6rem 0; }
.cautions ul { margin: .2rem 0; padding-left: 1.2rem; }
.headline { font-size: 1.05rem; }
.verdict { white-space: nowrap; } .verdict.yes { font-weight: 700; }
table { border-collapse: collapse; margin: .6rem 0; width: 100%; font-variant-numeric: tabular-nums; font-size: 13px; }
caption { text-align: left; font-weight: 700; padding-bottom: .2rem; }
th, td { border-bottom: 1px solid #c4ccd6; padding: .2rem .45rem; text-align: left; vertical-align: top; }
th { background: #eef1f5; }
td.n, th.n { text-align: right; }
figure { margin: .5rem 0; } figure svg { display: block; max-width: 100%; height: auto; }
figcaption { font-size: 12px; color: ${PALETTE.muted}; }
.evidence { display: flex; flex-wrap: wrap; gap: 0 1rem; align-items: flex-start; } .evidence > div { flex: 1 1 22rem; }
.row { display: flex; flex-wrap: wrap; gap: .4rem 1rem; align-items: flex-start; }
.row figure { margin: .2rem 0; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: .1rem .8rem; margin: .4rem 0; }
dl.facts dt { font-weight: 700; } dl.facts dd { margin: 0; }
.note-text { white-space: pre-wrap; }
@page { size: A4; margin: 10mm 11mm; }
@media print {
  body { margin: 0; max-width: none; font-size: 9.5pt; line-height: 1.3; padding: 0; }
  h1 { font-size: 15pt; } h2 { font-size: 11.5pt; margin: .7rem 0 .25rem; } h3 { font-size: 10.5pt; }
  table { font-size: 8pt; margin: .3rem 0; } th, td { padding: .08rem .35rem; }
  .cautions { padding: .15rem .7rem; margin: .35rem 0; } .status { padding: .2rem .5rem; margin: .35rem 0; }
  ul.settings { columns: 2; column-gap: 1.5rem; margin: .2rem 0; }
  .evidence figure { flex: 0 0 300px; width: 300px; margin: 0; } .evidence svg { width: 300px; }
  .summary { break-after: page; }
  section.run { break-before: page; }
  section.after-runs { break-before: page; }
  figure, table, .cautions, .status { break-inside: avoid; }
  h2, h3 { break-after: avoid; }
}
`;

function statusBlock(results: DebriefResults): string {
  return `<p class="status${results.event.complete ? '' : ' unfinished'}" role="status">${e(results.event.status)}</p>`;
}

function cautions(list: readonly string[], heading: string): string {
  return `<div class="cautions" role="note"><p><strong>${e(heading)}</strong></p><ul>${list.map((c) => `<li>${e(c)}</li>`).join('')}</ul></div>`;
}

function headlineBlock(h: EventHeadline): string {
  const o = h.overall;
  const verdict = o
    ? `<p class="headline"><strong>Event verdict:</strong> ${verdictCell(h.verdict)} — combined p = ${formatP(o.pValue)} over ${o.count} run${o.count === 1 ? '' : 's'} (the smallest per-statistic value below, calibrated; α = ${h.alpha}).</p>`
    : '<p class="headline"><strong>Event verdict:</strong> not judged: no run has been judged yet.</p>';
  const rows = STATISTIC_NAMES.map((s) => {
    const c = h.perStatistic[s];
    return [e(STAT_LABELS[s]), c ? String(c.count) : '—', `<span class="num">${c ? num(c.statistic, 2) : '—'}</span>`, `<strong>${formatP(c?.pValue)}</strong>`, c ? (c.pValue <= h.alpha ? '▲ at or below α' : '○ above α') : '—'];
  });
  return `${verdict}
${table(['statistic', 'runs', `${METHOD_NAMES[h.method]}: statistic`, 'combined p', 'against α'], rows, 'Each statistic combined across the completed runs')}
<p class="muted">Basis: ${e(h.basis)}. The anytime-valid evidence below stays valid however runs were added or stopped.</p>`;
}

const STAT_LABELS: Record<(typeof STATISTIC_NAMES)[number], string> = {
  l2: 'L2: distance from the simulated mean track',
  score: 'score: Mahalanobis distance on the kept components',
  residual: 'residual: what the kept components miss',
};

function evidenceBlock(results: DebriefResults): string {
  const ev = results.evidence;
  if (!ev) return '<p>No anytime-valid evidence: no run has been judged yet, or the report was made from a document without it.</p>';
  const chart = ev.afterEachRun.length > 0 ? evidenceChart(ev.afterEachRun, ev.threshold, 'ev') : undefined;
  return `<div class="evidence"><div><p><strong>Anytime-valid evidence:</strong> ${num(ev.current, 2)} against the threshold ${num(ev.threshold, 0)} — ${
    ev.established ? `<strong>a discrepancy is established</strong>${ev.crossedAt ? ` (the threshold was reached at completed run ${ev.crossedAt})` : ''}` : '<strong>no discrepancy established</strong>'
  }.</p>
<p>What it means: the evidence starts at 1 and grows when runs look unlike the simulation. Reaching ${num(ev.threshold, 0)} (1/α) establishes a discrepancy with a false-alarm probability of at most α, however the team decided to add runs or stop. Staying below it is not proof of agreement.</p></div>
${figure(chart, 'Evidence after each completed run; the threshold dashed.')}</div>`;
}

function vignetteTable(report: AssessmentReport, results: DebriefResults): string {
  return table(
    ['vignette', 'condition', 'live runs', 'p (calibrated)', 'p (Holm)', 'verdict', 'advice'],
    report.vignettes.map((v) => [
      e(v.id),
      e(v.label ?? ''),
      String(v.runs),
      formatP(v.combined?.pValue),
      formatP(v.adjustedPValue),
      verdictCell(v.verdict),
      e(results.advice.find((a) => a.vignette === v.id)?.short ?? '—'),
    ]),
    'Per vignette (verdicts use Holm’s adjustment over the vignettes; the advice is explained under Methods)',
  );
}

function runFacts(r: RunReport): string {
  const items: Array<[string, string]> = [
    ['samples', String(r.samples)],
    ['span', r.span ? `${num(r.span[0])} – ${num(r.span[1])} s` : '—'],
    ['judged window', r.judgedIntervals?.length ? r.judgedIntervals.map(([a, b]) => `${num(a, 0)}–${num(b, 0)} s`).join(', ') : '—'],
    ['simulated runs used', r.simsUsed === undefined ? '—' : String(r.simsUsed)],
    ['components', r.components === undefined ? '—' : `${r.components}${r.varianceExplained !== undefined ? ` (${num(100 * r.varianceExplained)} % of the variance)` : ''}`],
  ];
  return `<dl class="facts">${items.map(([k, v]) => `<dt>${e(k)}</dt><dd>${e(v)}</dd>`).join('')}</dl>`;
}

function practicalTable(r: RunReport): string {
  if (!r.practical || r.practical.length === 0) return '';
  return table(
    ['channel', 'largest deviation from the mean', 'time outside the 95 % band', 'largest excess beyond the band', 'integrated excess', 'tolerance', 'within tolerance'],
    r.practical.map((d) => [
      e(d.channel),
      `${num(d.maxDeviation)} ${e(d.unit)} at ${num(d.maxDeviationAt, 0)} s`,
      `${num(d.timeOutside, 0)} s`,
      d.leavesBand ? `${num(d.maxExcess)} ${e(d.unit)}${d.maxExcessAt !== undefined ? ` at ${num(d.maxExcessAt, 0)} s` : ''}` : 'stays inside',
      `${num(d.integratedExcess)} ${e(d.unit)}·s`,
      d.tolerance === undefined ? '—' : `± ${num(d.tolerance)} ${e(d.unit)}`,
      d.withinTolerance === undefined ? 'no tolerance in the plan' : d.withinTolerance ? '○ within' : '▲ beyond',
    ]),
    'Practical difference, in physical units (a separate answer from the p-values)',
  );
}

function runSection(report: AssessmentReport, r: RunReport, detail: RunDetail | undefined, index: number): string {
  const v = report.vignettes.find((x) => x.id === r.vignette);
  const horizon = v?.horizon ?? r.span?.[1] ?? 0;
  const title = `Run ${r.vignette} / ${r.track}${v?.label ? ` — ${v.label}` : ''}`;
  const parts: string[] = [`<section class="run" id="run-${index + 1}" aria-labelledby="run-${index + 1}-h"><h3 id="run-${index + 1}-h">${e(title)}</h3>`];
  if (r.status !== 'assessed') {
    parts.push(`<p><strong>Not judged:</strong> ${e(r.reason ?? 'no reason recorded')}</p>`);
  } else {
    const s = r.statistics;
    parts.push(runFacts(r));
    parts.push(
      table(
        ['statistic', 'value', 'p-value'],
        [
          ...STATISTIC_NAMES.map((k) => [e(STAT_LABELS[k]), num(s?.[k].value, 3), formatP(s?.[k].pValue)]),
          ['<strong>overall (calibrated minimum of the three)</strong>', '', `<strong>${formatP(r.overall?.pValue)}</strong>${r.overall && r.overall.pValue <= report.plan.alpha ? ' ▲ at or below α' : ''}`],
        ],
        'Statistics and p-values',
      ),
    );
    if (detail) {
      const charts = report.plan.channels.map((c, ci) => figure(envelopeChart(detail, ci, horizon, r.judgedIntervals ?? [], `r${index + 1}c${ci}`), `${c.name} (${c.unit}): the live track against the simulated bands; the shaded span is the judged window.`));
      parts.push(charts.join('\n'));
      const hist = s && detail.reference ? STATISTIC_NAMES.map((k) => figure(histogramChart(detail.reference?.[k] ?? [], s[k].value, k, `r${index + 1}h${k}`), `${k}: simulated runs, this run marked`)).join('') : '';
      parts.push(`<div class="row">${hist}</div>`);
      const oneComponent = detail.scores !== undefined && detail.scores.sims[1].every((v) => v === 0);
      parts.push(
        figure(
          scoreChart(detail, `r${index + 1}s`),
          `Scores of the simulated runs on the first two principal components, and the path of this run as it flew.${oneComponent ? ' Only one component was kept for this run, so only the horizontal position means anything.' : ''}`,
        ),
      );
    } else {
      parts.push('<p class="muted">No charts: the report was made from an assessment document, which holds no tracks or envelopes (make it from the journal or the running service for charts).</p>');
    }
    parts.push(practicalTable(r));
    const d = r.diagnosis;
    parts.push(d ? `<p><strong>Diagnosis:</strong> ${e(d.kind)}${d.timeShift !== undefined ? ` (lag ${num(d.timeShift)} s${d.timeShiftInterval ? `, 95 % interval ${num(d.timeShiftInterval[0])} to ${num(d.timeShiftInterval[1])} s` : ''})` : ''} — ${e(d.reason)}</p>` : `<p><strong>Diagnosis:</strong> none (the overall p-value is above α, so no kind of discrepancy is named).</p>`);
  }
  const log = (report.log ?? []).filter((x) => x.vignette === r.vignette && x.track === r.track && x.kind !== 'event');
  const flags = [...r.flags, ...log.filter((x) => x.kind === 'flag').map((x) => x.text)];
  parts.push(`<p><strong>Flags:</strong> ${flags.length ? flags.map((f) => e(f)).join('; ') : 'none'}</p>`);
  const notes = log.filter((x) => x.kind === 'note');
  parts.push(notes.length ? table(['time (UTC)', 'track time', 'by', 'note'], notes.map((n) => [utc(n.at), n.t === undefined ? '—' : `${num(n.t, 0)} s`, e(n.author ?? ''), `<span class="note-text">${e(n.text)}</span>`]), 'Notes on this run') : '<p><strong>Notes:</strong> none</p>');
  parts.push('</section>');
  return parts.join('\n');
}

function qualityTable(report: AssessmentReport): string {
  const rows = report.runs.map((r) => {
    const flags = (report.log ?? []).filter((x) => x.kind === 'flag' && x.vignette === r.vignette && x.track === r.track).map((x) => `${x.t !== undefined ? `${num(x.t, 0)} s: ` : ''}${x.text}`);
    return [
      e(r.vignette),
      e(r.track),
      String(r.samples),
      r.span ? `${num(r.span[0])}–${num(r.span[1])} s` : '—',
      r.gaps?.length ? r.gaps.map(([a, b]) => `${num(a)}–${num(b)} s`).join(', ') : 'none',
      r.flags.length ? e(r.flags.join(', ')) : 'none',
      flags.length ? flags.map((f) => e(f)).join('<br>') : 'none',
      r.status === 'assessed' ? 'judged' : `not judged: ${e(r.reason ?? '')}`,
    ];
  });
  const inputs = [report.inputs.baseline, report.inputs.live].filter((x) => x !== undefined);
  const read = inputs.length
    ? table(
        ['file', 'rows', 'accepted', 'skipped', 'duplicates', 'beyond horizon', 'tracks'],
        inputs.map((x) => [e(x.file), String(x.rows), String(x.accepted), String(x.skipped), String(x.duplicates), String(x.beyondHorizon), String(x.tracks)]),
        'Files read',
      )
    : '';
  return `${table(['vignette', 'run', 'samples', 'span', 'dropouts', 'window flags', 'data-quality flags raised while the run arrived', 'judgement'], rows, 'Data quality per run')}\n${read}`;
}

function notesTable(report: AssessmentReport): string {
  const notes = (report.log ?? []).filter((x) => x.kind === 'note');
  if (notes.length === 0) return '<p>No notes were logged.</p>';
  return table(
    ['time (UTC)', 'run', 'track time', 'by', 'note'],
    notes.map((n) => [utc(n.at), e([n.vignette, n.track].filter(Boolean).join(' / ') || 'event'), n.t === undefined ? '—' : `${num(n.t, 0)} s`, e(n.author ?? ''), `<span class="note-text">${e(n.text)}</span>`]),
    'All notes, oldest first',
  );
}

function methods(report: AssessmentReport, results: DebriefResults): string {
  const advice = results.advice.length
    ? `<h3>The advice per vignette, in full</h3>${table(['vignette', 'advice'], results.advice.map((a) => [e(a.vignette), e(a.full)]), 'How many more runs: the full explanation')}`
    : '';
  return `<h2>Methods</h2>
<p><strong>Smoothing.</strong> Each noisy, irregularly sampled track is smoothed into a curve by a penalized cubic B-spline (a P-spline) with ${report.plan.segments} segments; the amount of smoothing is chosen by generalized cross-validation. Sources: Eilers &amp; Marx, Statistical Science 11(2):89–121, 1996, doi:10.1214/ss/1038425655; Craven &amp; Wahba, Numerische Mathematik 31:377–403, 1979, doi:10.1007/BF01404567.</p>
<p><strong>Comparison.</strong> Each live curve is compared with its vignette's simulated curves in three ways: its distance from the simulated mean track (L2), its distance from the simulated runs on the leading functional principal components, scaled by their spread (a Mahalanobis distance), and what those components leave unexplained (the residual). Channels in different units are divided by their spread before being joined. Source: Ramsay &amp; Silverman, Functional Data Analysis, 2nd ed., Springer 2005, doi:10.1007/b98888.</p>
<p><strong>p-values.</strong> Every curve is judged by a model it did not shape: the live run by the model of the simulated runs, each simulated run by the model of the other simulated runs (leave-one-out; the number of components is fixed by the simulated runs alone). The live run's p-value is its rank among the simulated runs: (the number of simulated runs further out + U × (1 + the number exactly as far out)) / (number of simulated runs + 1), where U is a uniform draw that breaks ties (a smoothed p-value, Vovk, Gammerman &amp; Shafer, Algorithmic Learning in a Random World, Springer 2005, §2.4); the draws come from a generator seeded by the plan's seed and the run's name, so the report is reproducible. This is the jackknife of Barber, Candès, Ramdas &amp; Tibshirani, Annals of Statistics 49(1):486–507, 2021, doi:10.1214/20-AOS1965; its false-alarm rate was measured at the nominal level over 2,000 repetitions per statistic. The overall p-value ranks the smallest of the three among the same smallest values of the simulated runs, so looking at three statistics does not inflate false alarms. A run with a dropout or a late start or early end is judged only on the part it observed, against simulated runs cut to the same part.</p>
<p><strong>Across runs.</strong> Each statistic's p-values are combined across the runs by ${e(METHOD_NAMES[report.plan.combination])} (Fisher, Statistical Methods for Research Workers, 1932, §21.1), which is valid for a number of runs fixed before the event. The event verdict is the smallest of the three combined values, calibrated by seeded Monte Carlo draws that use the simulated runs as pseudo-live runs (the min-p method, Westfall &amp; Young, Resampling-Based Multiple Testing, Wiley 1993), so that three statistics do not inflate false alarms. The vignettes' verdicts are the same calibrated value per vignette, adjusted for the number of vignettes by Holm's method (Scandinavian Journal of Statistics 6(2):65–70, 1979), so that one condition among many is not flagged by chance.</p>
<p><strong>Anytime-valid evidence.</strong> Each final p-value is turned into an e-value (Vovk &amp; Wang, Annals of Statistics 49(3):1736–1754, 2021, doi:10.1214/20-AOS2020; Shafer, Journal of the Royal Statistical Society A 184(2):407–431, 2021, doi:10.1111/rssa.12647) and the e-values are multiplied run by run, separately for each statistic and vignette; the event's evidence averages over the three statistics of the vignettes' products and averages combined. By Ville's inequality (Ville, Étude critique de la notion de collectif, 1939) the product reaches 1/α with probability at most α if the runs behave like the simulation, whenever the team chose to look, add runs or stop. The simulated runs are shared by the runs of one vignette, so the bound is approximate.</p>
<p><strong>How many more runs.</strong> From the runs so far, a simulation estimates how many more runs would reach a decision with 80 % probability if the pattern continues, and says when more runs are unlikely to change the conclusion. It is an extrapolation from few runs: it guides planning and never changes the guarantee above. The short line per vignette on the first pages summarises it; the full wording is below.</p>
<p><strong>Practical difference.</strong> Apart from the p-values, each run's excursions outside the simulated pointwise 95 % band are measured in the channel's units (largest excess and when, time outside, integrated excess), with the largest deviation from the simulated mean and whether the run stays inside the band widened by the plan's tolerance. Statistically distinguishable and practically within tolerance are two separate answers.</p>
<p><strong>Diagnosis.</strong> For a run whose overall p-value is at or below α, the dominant kind of discrepancy is named: a level shift, a shape difference in the leading components, fine structure outside them, a timing difference (the lag in seconds with its interval, by a time shift or by a time warp that builds up during the run; Ramsay &amp; Silverman 2005, registration), or more spread than simulated.</p>
${advice}`;
}

/** The whole report. `generatedAt` is the one line that differs between two reports of one journal. */
export function renderReport(input: DebriefInput, results: DebriefResults, headline: EventHeadline, title = 'Debrief'): string {
  const report = input.report;
  const name = report.plan.name;
  const runs = report.runs.map((r, i) => runSection(report, r, input.details.get(runKey(r.vignette, r.track)), i));
  const source = input.source.kind === 'journal' ? `the journal ${input.source.name}` : input.source.kind === 'service' ? `the running service at ${input.source.name}` : `the assessment document ${input.source.name}`;
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>${e(title)}: ${e(name)}</title>
<meta name="viewport" content="width=device-width, initial-scale=1"><style>${STYLE}</style></head>
<body>
<main>
<section class="summary" aria-labelledby="summary-h">
<h1 id="summary-h">${e(title)}: ${e(name)}</h1>
<p class="generated">Generated ${e(results.generatedAt)} from ${e(source)} by plumbline (assessment document version ${report.version}).</p>
${statusBlock(results)}
${cautions(report.cautions, 'Read this first')}
<h2>The event</h2>
<ul class="settings">${settingsInWords(report.plan).map((s) => `<li>${e(s)}</li>`).join('')}</ul>
<p>Runs completed: ${results.event.runsCompleted} live run${results.event.runsCompleted === 1 ? '' : 's'} judged over ${report.vignettes.filter((v) => v.runs > 0).length} of ${report.vignettes.length} vignettes${results.event.runsInFlight.length ? `; ${results.event.runsInFlight.length} in flight (not included)` : ''}.</p>
<h2>Verdict</h2>
${headlineBlock(headline)}
${evidenceBlock(results)}
${vignetteTable(report, results)}
</section>
<h2>Runs</h2>
${runs.length ? runs.join('\n') : '<p>No live run has been judged yet.</p>'}
<section class="after-runs">
<h2>Data quality</h2>
${qualityTable(report)}
<h2>Notes</h2>
${notesTable(report)}
${methods(report, results)}
<h2>Cautions</h2>
${cautions(report.cautions, 'What this report does and does not say')}
<ul><li>A small p-value says the live runs are distinguishable from the simulation, not by how much or whether it matters for the intended use: read the practical difference in physical units.</li></ul>
</section>
</main>
</body></html>
`;
}
