/**
 * The feed protocol (version 1): JSON text messages over WebSocket. The zod schemas below are the
 * definition; the JSON Schema in the README is generated from them (`plumbline schema protocol`).
 *
 * Producer → server (path /feed):  open, points, close, note
 * Dashboard → server (path /watch): note, ping
 * Server → client: opened, ack, closed, noted, pong, error, (dashboards) snapshot and deltas
 *
 * Every client message has `v` (protocol version, 1), `type` and an `id` chosen by the sender;
 * the reply to it carries the same id.
 */
import { z } from 'zod';
import { DEFAULT_LIMITS } from './limits.js';

export const PROTOCOL_VERSION = 1;

/**
 * Identifiers (message ids, vignettes, tracks) must be well-formed Unicode without control
 * characters: a lone surrogate cannot be stored as UTF-8 in the journal, so after a restart the
 * track would come back under another name and its producer could not resume it.
 */
const LONE_SURROGATE = /[\ud800-\udbff](?![\udc00-\udfff])|(?<![\ud800-\udbff])[\udc00-\udfff]/;
const CONTROL = /[\u0000-\u001f\u007f]/;
export function isCleanIdentifier(s: string): boolean {
  return !LONE_SURROGATE.test(s) && !CONTROL.test(s);
}
const id = z
  .string()
  .min(1)
  .max(DEFAULT_LIMITS.maxIdLength)
  .refine(isCleanIdentifier, { message: 'identifiers must be well-formed Unicode without control characters' });
const trackRef = { vignette: id, track: id };

export const pointSchema = z.strictObject({
  seq: z.number().int().min(1).describe('per-track sequence number: 1, 2, 3, ... in the order the producer made the points'),
  t: z.number().min(0).describe('seconds from the track start'),
  values: z.array(z.number()).min(1).describe('one value per channel, in the order given at open'),
});

export const openSchema = z.strictObject({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('open'),
  id,
  ...trackRef,
  source: z.enum(['live', 'sim']),
  channels: z.array(z.string()).min(1).describe('channel names, a permutation of the plan channels'),
});

export const pointsSchema = z.strictObject({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('points'),
  id,
  ...trackRef,
  points: z.array(pointSchema).min(1).max(DEFAULT_LIMITS.maxPointsPerMessage),
});

export const closeSchema = z.strictObject({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('close'),
  id,
  ...trackRef,
  lastSeq: z.number().int().min(0).describe('the sequence number of the last point of the track'),
});

export const noteSchema = z.strictObject({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('note'),
  id,
  vignette: id.optional(),
  track: id.optional(),
  t: z.number().min(0).optional().describe('track time the note refers to, s'),
  text: z.string().min(1).max(DEFAULT_LIMITS.maxNoteLength),
  author: z.string().max(DEFAULT_LIMITS.maxIdLength).optional(),
});

export const pingSchema = z.strictObject({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('ping'),
  id,
});

export const clientMessageSchema = z.discriminatedUnion('type', [openSchema, pointsSchema, closeSchema, noteSchema, pingSchema]);
export type ClientMessage = z.infer<typeof clientMessageSchema>;
export type OpenMessage = z.infer<typeof openSchema>;
export type PointsMessage = z.infer<typeof pointsSchema>;
export type CloseMessage = z.infer<typeof closeSchema>;
export type NoteMessage = z.infer<typeof noteSchema>;
export type FeedPoint = z.infer<typeof pointSchema>;

/** Stable error codes of the protocol. */
export const ERROR_CODES = {
  BAD_JSON: 'the message is not valid JSON',
  BAD_MESSAGE: 'the message does not match the protocol schema',
  UNSUPPORTED_VERSION: 'the protocol version is not supported',
  NOT_PERMITTED: 'this connection may not send this message',
  UNKNOWN_VIGNETTE: 'the vignette is not in the event plan',
  CHANNELS_MISMATCH: 'the channels do not match the event plan',
  TRACK_CONFLICT: 'the track exists with another source or channels',
  TRACK_NOT_OPEN: 'points or close for a track that was never opened',
  TRACK_CLOSED: 'points for a track that is already closed',
  WRONG_VALUE_COUNT: 'a point has the wrong number of values',
  NOT_FINITE: 'a value is not a finite number',
  TIME_REVERSED: 'a point is earlier than the track has reached, beyond the tolerance',
  DUPLICATE_CONFLICT: 'a sequence number was sent before with other data',
  DUPLICATE_TIME: 'another point of the track has the same time',
  BEYOND_HORIZON: 'the point is later than the vignette horizon',
  INCOMPLETE: 'close before all points up to lastSeq arrived',
  RATE_LIMITED: 'too many messages; slow down',
  JOURNAL_UNAVAILABLE: 'the journal cannot be written (disk full, read-only, I/O error); nothing of this message was committed: resend it once the journal recovers',
  INTERNAL: 'the server failed to process the message',
} as const;
export type ErrorCode = keyof typeof ERROR_CODES;

export interface ErrorReply {
  readonly v: 1;
  readonly type: 'error';
  /** The offending message's id (absent when it could not be read). */
  readonly id?: string;
  readonly code: ErrorCode;
  readonly reason: string;
  /** Points of a `points` message that were refused, with their own codes. */
  readonly rejected?: ReadonlyArray<{ seq: number; code: ErrorCode; reason: string }>;
}

export interface AckReply {
  readonly v: 1;
  readonly type: 'ack';
  readonly id: string;
  readonly vignette: string;
  readonly track: string;
  /** Highest n such that points 1..n of the track are committed to the journal. */
  readonly committedSeq: number;
  readonly accepted: number;
  readonly duplicates: number;
}

export interface OpenedReply {
  readonly v: 1;
  readonly type: 'opened';
  readonly id: string;
  readonly vignette: string;
  readonly track: string;
  /** Resume point: points 1..committedSeq are already in the journal. */
  readonly committedSeq: number;
  readonly closed: boolean;
}

export interface ClosedReply {
  readonly v: 1;
  readonly type: 'closed';
  readonly id: string;
  readonly vignette: string;
  readonly track: string;
}

/** Answer to `ping` (an application-level liveness probe: browsers cannot send WebSocket pings). */
export interface PongReply {
  readonly v: 1;
  readonly type: 'pong';
  readonly id: string;
}

export interface NotedReply {
  readonly v: 1;
  readonly type: 'noted';
  readonly id: string;
  readonly entry: number;
}

export type ServerReply = ErrorReply | AckReply | OpenedReply | ClosedReply | NotedReply | PongReply;

export function errorReply(code: ErrorCode, reason: string, msgId?: string, rejected?: ErrorReply['rejected']): ErrorReply {
  return { v: 1, type: 'error', id: msgId, code, reason, ...(rejected ? { rejected } : {}) };
}

export type Parsed = { ok: true; message: ClientMessage } | { ok: false; error: ErrorReply };

const isId = (x: unknown): x is string => typeof x === 'string' && x.length >= 1 && x.length <= DEFAULT_LIMITS.maxIdLength && isCleanIdentifier(x);
const POINTS_KEYS = 6; // v, type, id, vignette, track, points

/**
 * The common case checked without zod: a `points` message that `pointsSchema` certainly accepts
 * (every test here implies the schema's; identifiers are measured in UTF-16 code units, at least
 * the schema's count). Returns the message itself, or undefined: then the schema decides and
 * words the error. The frame is fresh from JSON.parse, so the object is the sender's own data.
 */
export function fastPointsMessage(raw: unknown): PointsMessage | undefined {
  if (typeof raw !== 'object' || raw === null || Array.isArray(raw)) return undefined;
  const m = raw as Record<string, unknown>;
  if (m.v !== PROTOCOL_VERSION || m.type !== 'points' || !isId(m.id) || !isId(m.vignette) || !isId(m.track)) return undefined;
  let keys = 0;
  for (const k in m) {
    if (!Object.hasOwn(m, k)) return undefined;
    keys++;
  }
  if (keys !== POINTS_KEYS) return undefined; // the five checked above and `points`, nothing else
  const points = m.points;
  if (!Array.isArray(points) || points.length < 1 || points.length > DEFAULT_LIMITS.maxPointsPerMessage) return undefined;
  for (const p of points as unknown[]) {
    if (typeof p !== 'object' || p === null || Array.isArray(p)) return undefined;
    const q = p as Record<string, unknown>;
    const { seq, t, values } = q;
    if (typeof seq !== 'number' || !Number.isSafeInteger(seq) || seq < 1) return undefined;
    if (typeof t !== 'number' || !Number.isFinite(t) || t < 0) return undefined;
    if (!Array.isArray(values) || values.length < 1) return undefined;
    for (const x of values as unknown[]) if (typeof x !== 'number' || !Number.isFinite(x)) return undefined;
    let n = 0;
    for (const k in q) {
      if (!Object.hasOwn(q, k)) return undefined;
      n++;
    }
    if (n !== 3) return undefined; // seq, t, values
  }
  return m as unknown as PointsMessage;
}

/** Parse one text frame; never throws. */
export function parseClientMessage(text: string): Parsed {
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (e) {
    return { ok: false, error: errorReply('BAD_JSON', `not valid JSON: ${e instanceof Error ? e.message : String(e)}`) };
  }
  const fast = fastPointsMessage(raw);
  if (fast) return { ok: true, message: fast };
  const msgId = typeof raw === 'object' && raw !== null && 'id' in raw && typeof raw.id === 'string' ? raw.id.slice(0, DEFAULT_LIMITS.maxIdLength) : undefined;
  if (typeof raw === 'object' && raw !== null && 'v' in raw && raw.v !== PROTOCOL_VERSION) {
    return { ok: false, error: errorReply('UNSUPPORTED_VERSION', `protocol version ${JSON.stringify(raw.v)} is not supported; this server speaks ${PROTOCOL_VERSION}`, msgId) };
  }
  const r = clientMessageSchema.safeParse(raw);
  if (!r.success) {
    const issues = r.error.issues.slice(0, 5).map((i) => `${i.path.join('.') || '(message)'}: ${i.message}`);
    return { ok: false, error: errorReply('BAD_MESSAGE', issues.join('; '), msgId) };
  }
  return { ok: true, message: r.data };
}

export function protocolJsonSchema(): Record<string, unknown> {
  return z.toJSONSchema(clientMessageSchema, { io: 'input' }) as Record<string, unknown>;
}
