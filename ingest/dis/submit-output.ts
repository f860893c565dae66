/**
 * The in-process output of the DIS source (`plumbline serve --dis`): each producer message goes to
 * `RunningServer.submit`, which takes it through the same batch → validate → journal → acknowledge
 * path as a `/feed` frame. The track bookkeeping is `TrackOutbox` (run-output.ts), as for the
 * WebSocket client, so points are held until the journal has them.
 *
 * Messages are checked against the protocol schema before they are handed over (the service trusts
 * in-process messages to be well-formed); one that fails is not sent and is
 * answered here with the service's BAD_MESSAGE error.
 * Replies are handled on the next microtask, never inside `transmit`, so a service that answers
 * synchronously cannot re-enter `pump`.
 */
import { clientMessageSchema, errorReply, type ClientMessage, type ServerReply } from '../service/protocol.js';
import { TrackOutbox, type OutboxOptions } from './run-output.js';

/** The part of `RunningServer` this output needs (../service/source.ts). */
export type { Submit } from '../service/source.js';
import type { Submit } from '../service/source.js';

export class SubmitOutput extends TrackOutbox {
  private stopped = false;

  constructor(
    private readonly submit: Submit,
    options: OutboxOptions,
  ) {
    super(options);
  }

  protected transmit(message: ClientMessage): boolean {
    if (this.stopped) return false;
    const checked = clientMessageSchema.safeParse(message);
    if (!checked.success) {
      // answered as the service answers a bad frame, so that the window and the counts stay right
      const reason = checked.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ');
      const reply = errorReply('BAD_MESSAGE', `the DIS source built a message the protocol refuses: ${reason}`, message.id);
      queueMicrotask(() => this.onReply(reply));
      return true;
    }
    this.submit(checked.data, (r) => queueMicrotask(() => this.onReply(r)));
    return true;
  }

  stop(): void {
    this.stopped = true;
  }
}
