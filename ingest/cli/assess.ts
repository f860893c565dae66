/**
 * `plumbline assess`: judge recorded live runs against simulated ones, from files.
 *
 *   plumbline assess --plan plan.json --baseline sims.csv --live live.csv [--out result.json] [--skip-bad-rows]
 */
import { writeFile } from 'node:fs/promises';
import { assessEvent } from '../../engine/event.js';
import { loadPlan, type EventPlan } from '../plan.js';
import { buildReport, type AssessmentReport } from '../report.js';
import { readTracks, type ReadResult } from '../tracks-reader.js';
import { formatNumber, formatP, table } from './format.js';
import { terminalProgress } from './progress.js';

export interface AssessInputs {
  readonly planPath: string;
  readonly baselinePath: string;
  readonly livePath: string;
  readonly skipBadRows?: boolean;
}

/** Read the files and judge every live run (the whole batch path, without printing). */
export async function assessFiles(inputs: AssessInputs, showProgress = true): Promise<{ plan: EventPlan; report: AssessmentReport }> {
  const progress = terminalProgress();
  const plan = await loadPlan(inputs.planPath);
  const read = async (path: string, label: string): Promise<ReadResult> =>
    readTracks(path, plan, {
      skipBadRows: inputs.skipBadRows,
      onProgress: showProgress ? (done, total) => progress.update(`reading ${label}`, done, total) : undefined,
    });
  const baseline = await read(inputs.baselinePath, 'baseline');
  const live = await read(inputs.livePath, 'live runs');
  const event = assessEvent(plan.vignettes, plan.channels, plan.analysis, baseline.tracks, live.tracks, (stage, v, d, t) => {
    if (showProgress) progress.update(stage === 'baseline' ? `smoothing simulated tracks of ${v}` : `judging live runs of ${v}`, d, t);
  });
  progress.done();
  return { plan, report: buildReport(plan, event, { baseline: baseline.report, live: live.report }) };
}

/** "within" when every channel with a tolerance stays inside its widened band, else the channels beyond it. */
function practicalCell(r: AssessmentReport['runs'][number]): string {
  const rows = (r.practical ?? []).filter((d) => d.withinTolerance !== undefined);
  if (rows.length === 0) return '—';
  const beyond = rows.filter((d) => d.withinTolerance === false).map((d) => d.channel);
  return beyond.length === 0 ? 'within' : `beyond: ${beyond.join(',')}`;
}

export function formatReport(plan: EventPlan, report: AssessmentReport): string {
  const channels = plan.channels;
  const rows = report.runs.map((r) => [
    r.vignette,
    r.track,
    formatP(r.statistics?.l2.pValue),
    formatP(r.statistics?.score.pValue),
    formatP(r.statistics?.residual.pValue),
    formatP(r.overall?.pValue),
    ...channels.map((c) => formatNumber(r.rmsDeviation?.[c.name], 1)),
    practicalCell(r),
    r.diagnosis ? `${r.diagnosis.kind}${r.diagnosis.timeShift !== undefined ? ` ${r.diagnosis.timeShift.toFixed(1)}s` : ''}` : '—',
    r.status === 'assessed' ? r.flags.join(',') : `not judged: ${r.reason ?? ''}`,
  ]);
  const header = ['vignette', 'run', 'p(L2)', 'p(score)', 'p(resid)', 'p(overall)', ...channels.map((c) => `rms ${c.name} (${c.unit})`), 'tolerance', 'kind', 'flags'];
  const out: string[] = [];
  out.push(`${report.plan.name}: ${report.runs.length} live runs in ${report.vignettes.length} vignettes`);
  out.push('');
  out.push(table(header, rows));
  out.push('');
  const models = report.vignettes.map((v) => [
    v.id,
    v.status,
    String(v.model?.sims ?? '—'),
    String(v.model?.components ?? '—'),
    v.model ? `${(100 * v.model.varianceExplained).toFixed(1)} %` : '—',
    formatP(v.combined?.pValue),
    formatP(v.adjustedPValue),
    v.verdict,
  ]);
  out.push(table(['vignette', 'baseline', 'sims', 'components', 'variance', 'p(combined)', 'p(Holm)', 'verdict'], models));
  out.push('');
  const inputs = [report.inputs.baseline, report.inputs.live].filter((x) => x !== undefined);
  for (const i of inputs) {
    const extra = [
      i.skipped > 0 ? `${i.skipped} bad rows skipped` : '',
      i.duplicates > 0 ? `${i.duplicates} duplicates dropped` : '',
      i.beyondHorizon > 0 ? `${i.beyondHorizon} beyond the horizon` : '',
    ].filter(Boolean);
    out.push(`${i.file}: ${i.accepted} points in ${i.tracks} tracks${extra.length ? ` (${extra.join(', ')})` : ''}`);
  }
  if (report.combined) {
    out.push('');
    out.push(...combinedLines(report.combined));
  }
  out.push('');
  for (const caution of report.cautions) out.push(`caution: ${caution}`);
  return out.join('\n');
}

/**
 * The event's fixed-sample evidence in words: the headline (the smallest per-statistic combined
 * p-value, calibrated over the three statistics) and the three combined values beside it, so the
 * reader sees which kind of difference drives it.
 */
export function combinedLines(c: NonNullable<AssessmentReport['combined']>): string[] {
  const b = c.byStatistic;
  const verdict = c.distinguishable ? `live runs are statistically distinguishable from the simulation at alpha = ${c.alpha}` : `no significant difference at alpha = ${c.alpha}`;
  return [
    `combined over ${c.count} runs: p = ${c.bound ? '≤ ' : ''}${formatP(c.pValue)} — ${verdict}`,
    `  per statistic (${c.method}): L2 p = ${formatP(b.l2.pValue)}, score p = ${formatP(b.score.pValue)}, residual p = ${formatP(b.residual.pValue)}; led by ${c.leading}; the smallest calibrated over the three by ${c.draws} seeded Monte Carlo draws`,
  ];
}

/** The event's anytime-valid evidence in words, with each statistic's share beside it. */
export function evidenceLine(q: NonNullable<AssessmentReport['sequential']>): string {
  const per = q.statistics ? ` (L2 ${q.statistics.l2.toPrecision(3)}, score ${q.statistics.score.toPrecision(3)}, residual ${q.statistics.residual.toPrecision(3)})` : '';
  return `anytime-valid evidence ${q.evidence.toPrecision(3)}${per} against a threshold of ${q.threshold.toPrecision(3)}: ${q.established ? 'a discrepancy is established, whatever the decisions to stop or add runs' : 'not established'}`;
}

export async function writeReport(path: string, report: AssessmentReport): Promise<void> {
  await writeFile(path, `${JSON.stringify(report, null, 1)}\n`, 'utf8');
}
