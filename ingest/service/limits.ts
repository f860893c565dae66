/**
 * Every limit of the service, with its name and default, in one place (a bad or slow peer is
 * stopped by one of these before it can grow the server's memory).
 */
export interface ServiceLimits {
  /** Largest WebSocket message, bytes; a larger frame closes the connection with 1009. */
  readonly maxPayload: number;
  /** Most points in one `points` message. */
  readonly maxPointsPerMessage: number;
  /** Messages per second a connection may send on average (token bucket refill rate). */
  readonly messagesPerSecond: number;
  /** Burst allowance of the token bucket. */
  readonly messageBurst: number;
  /** Rate-limited messages in a row before the peer counts as abusive and is closed (1008). */
  readonly floodStrikes: number;
  /** How far back in track time a point may arrive out of order before it is refused, seconds. */
  readonly timeReversalTolerance: number;
  /** Longest track id, vignette id and note. */
  readonly maxIdLength: number;
  readonly maxNoteLength: number;
  /**
   * Changes are gathered this long (from the first) and sent to every dashboard as one message
   * holding the latest per key, ms: a point waits at most this for the update that shows it.
   */
  readonly dashboardWindowMs: number;
  /** A dashboard whose socket buffer passes this is skipped and sent a fresh snapshot once it has read its backlog. */
  readonly slowClientBytes: number;
  /** A dashboard that stays above `slowClientBytes` this long is dropped, with a note in the log, ms. */
  readonly slowClientGraceMs: number;
  /** Heartbeat interval; a peer that has not answered the previous ping is terminated, ms. */
  readonly heartbeatMs: number;
  /** Accepted points are committed in one transaction at most this often, ms (0: every event-loop turn). */
  readonly journalFlushMs: number;
  /** Provisional assessment of a run in flight: at most once per this much track time, s. */
  readonly provisionalEvery: number;
  /** Provisional windows end on multiples of this (track time, s), so the baseline cut is shared. */
  readonly provisionalStep: number;
  /** Log entries kept in the state snapshot (all stay in the journal). */
  readonly logEntries: number;
}

export const DEFAULT_LIMITS: ServiceLimits = {
  maxPayload: 64 * 1024,
  maxPointsPerMessage: 1000,
  messagesPerSecond: 2000,
  messageBurst: 4000,
  floodStrikes: 200,
  timeReversalTolerance: 5,
  maxIdLength: 128,
  maxNoteLength: 2000,
  dashboardWindowMs: 25,
  slowClientBytes: 1024 * 1024,
  slowClientGraceMs: 10_000,
  heartbeatMs: 30_000,
  journalFlushMs: 0,
  provisionalEvery: 10,
  provisionalStep: 10,
  logEntries: 500,
};
