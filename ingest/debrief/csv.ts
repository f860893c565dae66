/**
 * The debrief's tables for spreadsheets and other tools: `runs.csv` (one row per completed run)
 * and `notes.csv` (the analysts' notes). RFC 4180: comma-separated, CRLF line ends, a field with a
 * comma, quote or line break is quoted with its quotes doubled. Numbers are written as JSON writes
 * them (shortest round-trip form), so each equals its value in results.json exactly. A text cell
 * from outside that a spreadsheet would run as a formula (starting with = + - @, tab or CR) gets a
 * leading apostrophe (OWASP, "CSV Injection").
 */
import type { AssessmentReport, RunReport } from '../report.js';

const EOL = '\r\n';

function field(x: string | number | boolean | undefined): string {
  if (x === undefined) return '';
  if (typeof x === 'number') return Number.isFinite(x) ? JSON.stringify(x) : '';
  const s = String(x);
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** Text from outside: guarded against formula execution, then quoted as needed. */
function text(x: string | undefined): string {
  if (x === undefined) return '';
  return field(/^[=+\-@\t\r]/.test(x) ? `'${x}` : x);
}

function csv(header: readonly string[], rows: ReadonlyArray<ReadonlyArray<string>>): string {
  return [header.join(','), ...rows.map((r) => r.join(','))].join(EOL) + EOL;
}

/** Column names of runs.csv for the plan's channels (also the documentation of the file). */
export function runsColumns(channels: AssessmentReport['plan']['channels']): string[] {
  return [
    'vignette', 'run', 'status', 'samples', 'span_start_s', 'span_end_s', 'sims_used',
    'l2', 'p_l2', 'score', 'p_score', 'residual', 'p_residual', 'p_overall', 'flags',
    ...channels.flatMap((c) => [
      `${c.name}_max_deviation_${c.unit}`, `${c.name}_max_deviation_at_s`, `${c.name}_time_outside_band_s`,
      `${c.name}_max_excess_${c.unit}`, `${c.name}_tolerance_${c.unit}`, `${c.name}_within_tolerance`,
    ]),
    'diagnosis', 'time_shift_s', 'diagnosis_reason', 'not_judged_reason',
  ];
}

function runRow(r: RunReport, channels: AssessmentReport['plan']['channels']): string[] {
  const s = r.statistics;
  return [
    text(r.vignette), text(r.track), field(r.status), field(r.samples), field(r.span?.[0]), field(r.span?.[1]), field(r.simsUsed),
    field(s?.l2.value), field(s?.l2.pValue), field(s?.score.value), field(s?.score.pValue), field(s?.residual.value), field(s?.residual.pValue),
    field(r.overall?.pValue), field(r.flags.join(';')),
    ...channels.flatMap((c) => {
      const d = r.practical?.find((x) => x.channel === c.name);
      return [field(d?.maxDeviation), field(d?.maxDeviationAt), field(d?.timeOutside), field(d?.maxExcess), field(d?.tolerance), field(d?.withinTolerance)];
    }),
    field(r.diagnosis?.kind), field(r.diagnosis?.timeShift), text(r.diagnosis?.reason), text(r.reason),
  ];
}

export function runsCsv(report: AssessmentReport): string {
  const channels = report.plan.channels;
  return csv(runsColumns(channels), report.runs.map((r) => runRow(r, channels)));
}

export const NOTES_COLUMNS = ['time_utc', 'vignette', 'run', 'track_time_s', 'author', 'text'] as const;

export function notesCsv(report: AssessmentReport): string {
  const notes = (report.log ?? []).filter((e) => e.kind === 'note');
  return csv(
    NOTES_COLUMNS,
    notes.map((e) => [field(new Date(e.at).toISOString()), text(e.vignette), text(e.track), field(e.t), text(e.author), text(e.text)]),
  );
}

/** Parse a CSV written by this module (RFC 4180 subset: quoted fields, CRLF); for tests and tools. */
export function parseCsv(body: string): string[][] {
  const rows: string[][] = [];
  let row: string[] = [];
  let cell = '';
  let quoted = false;
  for (let i = 0; i < body.length; i++) {
    const ch = body[i];
    if (quoted) {
      if (ch === '"' && body[i + 1] === '"') {
        cell += '"';
        i++;
      } else if (ch === '"') quoted = false;
      else cell += ch;
    } else if (ch === '"') quoted = true;
    else if (ch === ',') {
      row.push(cell);
      cell = '';
    } else if (ch === '\r' && body[i + 1] === '\n') {
      row.push(cell);
      rows.push(row);
      row = [];
      cell = '';
      i++;
    } else cell += ch;
  }
  if (cell !== '' || row.length > 0) {
    row.push(cell);
    rows.push(row);
  }
  return rows;
}
