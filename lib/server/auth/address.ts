/**
 * The client address used as the per-address throttling key and in the audit log.
 *
 * Next's server fills `X-Forwarded-For` with the socket address only when the request does not
 * already carry that header, so on a directly exposed server the header is whatever the client
 * sent. With `proxyHops` reverse proxies in front (each appending the address it saw), the
 * trustworthy entry is the `proxyHops`-th from the right. With no proxy (0) the rightmost entry
 * is used: correct for honest clients, spoofable by a hostile one — per-account throttling does
 * not depend on it. Set BORDERLINE_PROXY_HOPS when running behind a proxy.
 *
 * IPv6 addresses are keyed by their /64 prefix (one subscriber usually holds a whole /64);
 * IPv4-mapped IPv6 addresses are reduced to plain IPv4.
 */
import { isIP } from 'node:net';

export const UNKNOWN_ADDRESS = 'unknown';

export function clientAddressFromForwardedFor(header: string | null | undefined, proxyHops: number): string {
  if (!header) return UNKNOWN_ADDRESS;
  const parts = header
    .split(',')
    .map((p) => p.trim())
    .filter((p) => p.length > 0);
  if (parts.length === 0) return UNKNOWN_ADDRESS;
  const index = proxyHops <= 0 ? parts.length - 1 : parts.length - proxyHops;
  const raw = parts[Math.max(0, index)];
  return normalizeAddress(raw);
}

export function normalizeAddress(raw: string): string {
  let a = raw.trim().slice(0, 100);
  // "[v6]:port" and "v4:port" forms.
  const bracket = /^\[([^\]]+)\](?::\d+)?$/.exec(a);
  if (bracket) a = bracket[1];
  else if (/^\d{1,3}(\.\d{1,3}){3}:\d+$/.test(a)) a = a.slice(0, a.lastIndexOf(':'));
  const mapped = /^::ffff:(\d{1,3}(?:\.\d{1,3}){3})$/i.exec(a);
  if (mapped) a = mapped[1];
  const kind = isIP(a);
  if (kind === 4) return a;
  if (kind === 6) return `${ipv6Prefix64(a)}::/64`;
  return UNKNOWN_ADDRESS;
}

/** First four 16-bit groups of an IPv6 address, lower-case, without leading zeros. */
function ipv6Prefix64(a: string): string {
  const zone = a.indexOf('%');
  const addr = (zone >= 0 ? a.slice(0, zone) : a).toLowerCase();
  const [head, tail] = addr.includes('::') ? addr.split('::') : [addr, null];
  const headGroups = head ? head.split(':') : [];
  let groups: string[];
  if (tail === null) groups = headGroups;
  else {
    const tailGroups = tail ? tail.split(':') : [];
    // An embedded IPv4 tail counts as two groups.
    const tailCount = tailGroups.reduce((n, g) => n + (g.includes('.') ? 2 : 1), 0);
    groups = [...headGroups, ...Array<string>(8 - headGroups.length - tailCount).fill('0'), ...tailGroups];
  }
  return groups
    .slice(0, 4)
    .map((g) => (g.includes('.') ? '0' : String(parseInt(g || '0', 16).toString(16))))
    .join(':');
}
