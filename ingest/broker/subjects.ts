/**
 * Subject layout on the broker, stream and consumer names.
 *
 *   <prefix>.<event>.in.<vignette>.<run>        producer messages of the feed protocol (JSON), stream <PREFIX>_<event>_IN
 *   <prefix>.<event>.result.<vignette>.<run>    a monitor's final result of a run (last value kept), stream <PREFIX>_<event>_RESULTS
 *   <prefix>.<event>.monitor.<shard>            a monitor's announcement (its address and vignettes), in the results stream
 *
 * Every token is encoded (`encodeToken`): ASCII letters, digits, `_` and `-` stay, every other
 * UTF-8 byte becomes `~XX` (hex), so a vignette "S1.L1" or a run "live 7" is one token and names
 * with `.`, `*`, `>` or spaces cannot reach another subject. The encoding is reversible and is also
 * valid in stream and consumer names.
 *
 * A monitor reads the input stream with one durable pull consumer per vignette of its shard,
 * `<shard-name>_<vignette>`, filtered on `<prefix>.<event>.in.<vignette>.*`: nats-server 2.9 (Debian's)
 * takes one filter subject per consumer (several arrived in 2.10), and one track's messages
 * stay in one consumer, in order.
 */

const PLAIN = /^[A-Za-z0-9_-]$/;

export function encodeToken(s: string): string {
  if (s.length === 0) throw new RangeError('encodeToken: an empty name cannot be a subject token');
  let out = '';
  for (const ch of s) {
    if (PLAIN.test(ch)) out += ch;
    else for (const b of Buffer.from(ch, 'utf8')) out += `~${b.toString(16).toUpperCase().padStart(2, '0')}`;
  }
  return out;
}

export function decodeToken(token: string): string {
  if (!/^(?:[A-Za-z0-9_-]|~[0-9A-F]{2})+$/.test(token)) throw new RangeError(`decodeToken: "${token}" is not an encoded token`);
  const bytes: number[] = [];
  for (let i = 0; i < token.length; ) {
    if (token[i] === '~') {
      bytes.push(parseInt(token.slice(i + 1, i + 3), 16));
      i += 3;
    } else {
      bytes.push(token.charCodeAt(i));
      i++;
    }
  }
  return Buffer.from(bytes).toString('utf8');
}

export interface Layout {
  /** First token of every subject (default `plumbline`). */
  readonly prefix: string;
  /** The event's name (any text; encoded). */
  readonly event: string;
}

export const DEFAULT_PREFIX = 'plumbline';

function base(l: Layout): string {
  return `${encodeToken(l.prefix)}.${encodeToken(l.event)}`;
}

export function inputSubject(l: Layout, vignette: string, run: string): string {
  return `${base(l)}.in.${encodeToken(vignette)}.${encodeToken(run)}`;
}

export function inputFilter(l: Layout, vignette?: string): string {
  return vignette === undefined ? `${base(l)}.in.>` : `${base(l)}.in.${encodeToken(vignette)}.*`;
}

export function resultSubject(l: Layout, vignette: string, run: string): string {
  return `${base(l)}.result.${encodeToken(vignette)}.${encodeToken(run)}`;
}

export function monitorSubject(l: Layout, shard: string): string {
  return `${base(l)}.monitor.${encodeToken(shard)}`;
}

export function resultsFilters(l: Layout): string[] {
  return [`${base(l)}.result.>`, `${base(l)}.monitor.*`];
}

/** The vignette and run of an input subject, or undefined when it is not one. */
export function parseInputSubject(l: Layout, subject: string): { vignette: string; run: string } | undefined {
  const head = `${base(l)}.in.`;
  if (!subject.startsWith(head)) return undefined;
  const parts = subject.slice(head.length).split('.');
  if (parts.length !== 2) return undefined;
  try {
    return { vignette: decodeToken(parts[0]), run: decodeToken(parts[1]) };
  } catch {
    return undefined;
  }
}

export function inputStream(l: Layout): string {
  return `${encodeToken(l.prefix).toUpperCase()}_${encodeToken(l.event)}_IN`;
}

export function resultsStream(l: Layout): string {
  return `${encodeToken(l.prefix).toUpperCase()}_${encodeToken(l.event)}_RESULTS`;
}

export function consumerName(shard: string, vignette: string): string {
  return `${encodeToken(shard)}_${encodeToken(vignette)}`;
}
