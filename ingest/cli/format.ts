/** Plain-text tables and number formats for the terminal. */
export function formatP(p: number | undefined): string {
  if (p === undefined || !Number.isFinite(p)) return '—';
  if (p < 0.001) return p.toExponential(1);
  return p.toFixed(3);
}

export function formatNumber(x: number | undefined, digits = 2): string {
  if (x === undefined || !Number.isFinite(x)) return '—';
  return x.toFixed(digits);
}

/** Left-aligned text columns, right-aligned numeric-looking columns. */
export function table(header: readonly string[], rows: readonly (readonly string[])[]): string {
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => (r[i] ?? '').length)));
  const numeric = header.map((_, i) => rows.length > 0 && rows.every((r) => /^[-+0-9.e—]*$/.test(r[i] ?? '')));
  const line = (cells: readonly string[]) =>
    cells.map((c, i) => (numeric[i] ? c.padStart(widths[i]) : c.padEnd(widths[i]))).join('  ').trimEnd();
  return [line(header), line(widths.map((w) => '-'.repeat(w))), ...rows.map(line)].join('\n');
}
