/**
 * Input errors of the ingest layer: one class with a stable `code` (tests and callers branch on the
 * code, never on the message) and an optional location (file, 1-based line, column). The message
 * reads like a compiler diagnostic: `live.csv:17: column "range": not a number ("12a.5")`.
 */

/** Stable codes of input errors. */
export type InputErrorCode =
  /** The plan file could not be read (missing file, permissions, ...). */
  | 'PLAN_UNREADABLE'
  /** The plan file is not well-formed JSON or YAML. */
  | 'PLAN_SYNTAX'
  /** The plan parsed but breaks the schema; `issues` lists every problem with its path. */
  | 'PLAN_INVALID'
  /** The track file could not be read. */
  | 'TRACKS_UNREADABLE'
  /** The track file format could not be chosen (unknown extension and no explicit format). */
  | 'TRACKS_FORMAT'
  /** The CSV header is malformed, or its channel columns do not match the plan. */
  | 'TRACKS_HEADER'
  /** A data row is malformed or holds a value that is refused. */
  | 'TRACKS_ROW'
  /** A data row names a vignette that the plan does not define. */
  | 'TRACKS_VIGNETTE_UNKNOWN'
  /** The file holds no usable data rows. */
  | 'TRACKS_EMPTY';

/** Where an input problem is. All parts are optional; `line` is 1-based. */
export interface InputLocation {
  readonly file?: string;
  readonly line?: number;
  /** Column name (CSV header / NDJSON key) or 1-based column index. */
  readonly column?: string | number;
}

export interface InputErrorDetails extends InputLocation {
  /** What is wrong, without the location (e.g. `not a number ("abc")`). */
  readonly reason: string;
  /** Individual problems when there are several (schema issues of a plan), each `path: message`. */
  readonly issues?: readonly string[];
}

/**
 * Format a location as `file:line: column "name"` (parts that are absent are left out); returns ''
 * when there is no location at all.
 */
export function formatLocation(loc: InputLocation): string {
  let head = loc.file ?? '';
  if (loc.line !== undefined) head = head === '' ? `line ${loc.line}` : `${head}:${loc.line}`;
  let col = '';
  if (typeof loc.column === 'string') col = `column ${JSON.stringify(loc.column)}`;
  else if (typeof loc.column === 'number') col = `column ${loc.column}`;
  if (head === '') return col;
  return col === '' ? head : `${head}: ${col}`;
}

export class InputError extends Error {
  readonly code: InputErrorCode;
  readonly file?: string;
  readonly line?: number;
  readonly column?: string | number;
  readonly reason: string;
  readonly issues: readonly string[];

  constructor(code: InputErrorCode, details: InputErrorDetails) {
    const where = formatLocation(details);
    super(where === '' ? details.reason : `${where}: ${details.reason}`);
    this.name = 'InputError';
    this.code = code;
    this.file = details.file;
    this.line = details.line;
    this.column = details.column;
    this.reason = details.reason;
    this.issues = details.issues ?? [];
  }
}
