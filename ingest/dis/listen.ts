/**
 * Where the DIS source listens: `udp://HOST:PORT` (IPv6 hosts in brackets). HOST is a unicast
 * address of this host, 0.0.0.0 / :: for any (needed for broadcast), or a multicast group
 * (IPv4 224.0.0.0/4, IPv6 ff00::/8), which is then joined on the interface given separately.
 */
import { isIP } from 'node:net';

export class BridgeError extends Error {
  constructor(readonly code: 'BAD_LISTEN' | 'BAD_GROUP' | 'BIND_FAILED', message: string) {
    super(message);
    this.name = 'BridgeError';
  }
}

/** Parse `udp://HOST:PORT` (IPv6 hosts in brackets). */
export function parseListen(url: string, option = '--listen'): { host: string; port: number } {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    throw new BridgeError('BAD_LISTEN', `${option} must look like udp://HOST:PORT, got ${JSON.stringify(url)}`);
  }
  const port = Number(u.port);
  if (u.protocol !== 'udp:' || u.hostname === '' || u.port === '' || !Number.isInteger(port) || port < 0 || port > 65535) {
    throw new BridgeError('BAD_LISTEN', `${option} must look like udp://HOST:PORT, got ${JSON.stringify(url)}`);
  }
  return { host: u.hostname.replace(/^\[|\]$/g, ''), port };
}

/** An IPv4 224.0.0.0/4 or IPv6 ff00::/8 address. */
export function isMulticast(group: string): boolean {
  if (isIP(group) === 4) {
    const first = Number(group.split('.')[0]);
    return first >= 224 && first <= 239;
  }
  return isIP(group) === 6 && /^ff/i.test(group);
}


/**
 * The socket settings of a `udp://HOST:PORT` address: a multicast HOST is the group, joined on
 * `iface` (absent: the system's choice); any other HOST is bound as it is.
 */
export function listenTarget(url: string, iface?: string, option = '--dis'): { host: string; port: number; group?: string } {
  const { host, port } = parseListen(url, option);
  if (isMulticast(host)) return { host: iface ?? (isIP(host) === 6 ? '::' : '0.0.0.0'), port, group: host };
  if (iface !== undefined) throw new BridgeError('BAD_GROUP', `an interface goes with a multicast group address; ${JSON.stringify(host)} is not one`);
  return { host, port };
}
