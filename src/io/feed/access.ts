// Who may reach the feed: loopback by default, a shared token beyond it or behind a proxy, same-origin browsers only.

import { createHash, timingSafeEqual } from 'node:crypto';
import { isIP } from 'node:net';

/** True for names and addresses that only the local machine can reach. */
export function isLoopbackHost(host: string): boolean {
  const bare = host.startsWith('[') && host.endsWith(']') ? host.slice(1, -1) : host;
  if (bare === 'localhost' || bare === '::1') return true;
  return isIP(bare) === 4 && bare.startsWith('127.');
}

/** Constant-time comparison (of digests, so lengths do not leak either). */
export function tokenMatches(presented: string | null, expected: string): boolean {
  if (presented === null) return false;
  const a = createHash('sha256').update(presented).digest();
  const b = createHash('sha256').update(expected).digest();
  return timingSafeEqual(a, b);
}

/** The host part of a Host header (`name:port`, `[v6]:port`), lower case. */
export function hostOfHeader(header: string): string {
  const value = header.trim().toLowerCase();
  if (value.startsWith('[')) return value.slice(0, value.indexOf(']') + 1);
  const colon = value.lastIndexOf(':');
  return colon === -1 ? value : value.slice(0, colon);
}

/** A peer address as compared with declared ones: IPv4-mapped IPv6 (`::ffff:127.0.0.1`) as plain IPv4, lower case. */
export function normaliseAddress(address: string): string {
  const lower = address.trim().toLowerCase();
  const mapped = /^::ffff:(\d+\.\d+\.\d+\.\d+)$/.exec(lower);
  return mapped === null ? lower : mapped[1]!;
}
