/**
 * An in-process source of track points: something inside the service process that builds producer
 * messages itself (the DIS receiver, a broker monitor, a test) and hands them to the service.
 *
 *   source.start(submit) → submit(message, reply) → the same batch → validate → journal →
 *   acknowledge path as a `/feed` frame → reply(ack | error with its code)
 *
 * A source knows nothing of the statistics or of the other sources; the service knows a source
 * only by this interface. `startServer({ sources })` (or `RunningServer.addSource`) starts it,
 * `/healthz` lists its counters, and closing the server stops it before the last commit.
 */
import type { ClientMessage, ServerReply } from './protocol.js';

/** The service's entry for one producer message; `reply` gets the ack or the error. */
export type Submit = (message: ClientMessage, reply: (r: ServerReply) => void) => void;

export interface Source {
  /** Shown in /healthz and in the service log; unique among a server's sources. */
  readonly name: string;
  /** Begin producing; every message goes through `submit`. A rejection means the source did not start. */
  start(submit: Submit): void | Promise<void>;
  /** Stop producing and settle what is in flight (close open runs, wait for replies). Called once or more: later calls return the first one's promise. */
  stop(): Promise<void>;
  /** Plain JSON-serialisable counters, as /healthz shows them. */
  counters(): object;
}
