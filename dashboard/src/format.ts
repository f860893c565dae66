/**
 * How numbers and times are written everywhere on the page (one place, so the tests and the tables
 * agree with the panels).
 */

/** A p-value with three significant digits ("0.122", "0.00488"), "< 0.0001" below that. */
export function formatP(p: number | undefined): string {
  if (p === undefined || !Number.isFinite(p)) return '—';
  if (p >= 0.9995) return '1.00';
  if (p < 1e-4) return p.toExponential(1);
  return p.toPrecision(3);
}

/** A value in channel units: up to 4 significant digits, no exponent for everyday sizes. */
export function formatValue(x: number | undefined | null, digits = 4): string {
  if (x === undefined || x === null || !Number.isFinite(x)) return '—';
  const a = Math.abs(x);
  if (a !== 0 && (a >= 1e6 || a < 1e-3)) return x.toExponential(2);
  return Number(x.toPrecision(digits)).toString();
}

/** Track time in seconds with one decimal: "123.4 s". */
export function formatT(t: number | undefined): string {
  return t === undefined || !Number.isFinite(t) ? '—' : `${t.toFixed(1)} s`;
}

/** Wall clock (local time) of a server timestamp, HH:MM:SS. */
export function formatClock(ms: number | undefined): string {
  if (ms === undefined || !Number.isFinite(ms)) return '—';
  const d = new Date(ms);
  const two = (n: number) => String(n).padStart(2, '0');
  return `${two(d.getHours())}:${two(d.getMinutes())}:${two(d.getSeconds())}`;
}

/** A vignette's condition as "seaState low · lane 1". */
export function formatCondition(c: Readonly<Record<string, string | number>> | undefined): string {
  if (!c) return '';
  return Object.entries(c)
    .map(([k, v]) => `${k} ${String(v)}`)
    .join(' · ');
}

/** Text for the echarts rich-text tooltip: braces and pipes would start rich-text styles. */
export function plain(text: string): string {
  return text.replace(/[{}|]/g, ' ');
}
