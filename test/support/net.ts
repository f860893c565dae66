/** Small helpers for tests and harnesses that run the service as its own process on loopback. */
import { createServer } from 'node:net';

/** A TCP port that was free on 127.0.0.1 a moment ago (the OS picks it; the socket is closed again). */
export async function freePort(): Promise<number> {
  return new Promise((res, rej) => {
    const s = createServer();
    s.once('error', rej);
    s.listen(0, '127.0.0.1', () => {
      const a = s.address();
      s.close(() => res(typeof a === 'object' && a ? a.port : 0));
    });
  });
}
