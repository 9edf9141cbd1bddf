import { isIP } from 'node:net';
import { ErrorCodes, makeError } from '../core/errors.js';

/** The live feed's port when `--listen` names only a host. */
export const DEFAULT_LIVE_PORT = 8507;
export const DEFAULT_LIVE_HOST = '127.0.0.1';

export interface ListenAddress {
  host: string;
  port: number;
}

/** Parses `host:port`, `[v6]:port`, `host` or `:port`; port 0 asks the system for a free one. */
export function parseListen(text: string): ListenAddress {
  const bad = (why: string) =>
    makeError(
      ErrorCodes.USAGE,
      `cannot use '${text}' as a listen address: ${why}`,
      '--listen',
      'Give host:port, for example 127.0.0.1:8507 or 0.0.0.0:8507.',
    );
  const m = /^(?:\[([0-9A-Fa-f:.]+)\]|([^:[\]]*))(?::(\d{1,5}))?$/.exec(text.trim());
  const bareV6 = m === null && isIP(text.trim()) === 6;
  if (!m && !bareV6) throw bad('it is not host:port');
  const host = bareV6 ? text.trim() : (m![1] ?? m![2] ?? '') || DEFAULT_LIVE_HOST;
  const port = m?.[3] === undefined ? DEFAULT_LIVE_PORT : Number(m[3]);
  if (port > 65535) throw bad(`port ${port} is above 65535`);
  return { host, port };
}

/** True for addresses that only this machine can reach. */
export function isLoopbackHost(host: string): boolean {
  const h = host.toLowerCase().replace(/^\[|\]$/g, '');
  if (h === 'localhost' || h.endsWith('.localhost')) return true;
  if (isIP(h) === 4) return h.startsWith('127.');
  if (h === '::1') return true;
  return /^::ffff:127\./.test(h);
}

/** The token a request carries: `Authorization: Bearer <token>` or `?token=<token>`. */
export function requestToken(url: URL, authorization: string | undefined): string | null {
  const bearer = authorization !== undefined ? /^Bearer\s+(\S+)\s*$/i.exec(authorization) : null;
  if (bearer?.[1]) return bearer[1];
  return url.searchParams.get('token');
}

/** Splits a Host header into lower-case host name and port (null when absent). */
function splitHost(hostHeader: string): { name: string; port: string | null } | null {
  const m = /^(\[[^\]]+\]|[^:]+)(?::(\d+))?$/.exec(hostHeader.trim().toLowerCase());
  return m ? { name: m[1]!, port: m[2] ?? null } : null;
}

/**
 * On a loopback bind the Host header must name this machine. That shuts out DNS rebinding: a
 * page from a foreign name that re-points that name at 127.0.0.1 still sends its own name here.
 */
export function hostAllowed(hostHeader: string | undefined, loopbackBind: boolean): boolean {
  if (!loopbackBind) return true;
  if (hostHeader === undefined) return false;
  const h = splitHost(hostHeader);
  return h !== null && isLoopbackHost(h.name);
}

/**
 * A WebSocket's Origin is allowed when absent (a program, not a browser page), equal to the
 * page's own origin (same host and port as the request's Host), or listed in `extra`.
 */
export function originAllowed(
  origin: string | undefined,
  hostHeader: string | undefined,
  extra: readonly string[] = [],
): boolean {
  if (origin === undefined) return true;
  let u: URL;
  try {
    u = new URL(origin);
  } catch {
    return false;
  }
  if (u.protocol !== 'http:' && u.protocol !== 'https:') return false;
  if (extra.some((o) => o.replace(/\/$/, '').toLowerCase() === u.origin.toLowerCase())) return true;
  if (hostHeader === undefined) return false;
  const want = splitHost(hostHeader);
  if (!want) return false;
  const port = u.port || (u.protocol === 'https:' ? '443' : '80');
  // URL keeps IPv6 brackets in hostname, as the Host header does.
  return u.hostname.toLowerCase() === want.name && port === (want.port ?? '80');
}
