import { createServer, STATUS_CODES, type IncomingMessage, type Server } from 'node:http';
import type { ServerResponse } from 'node:http';
import { networkInterfaces } from 'node:os';
import type { Duplex } from 'node:stream';
import type { WebSocketServer } from 'ws';
import { ErrorCodes, makeError } from '../core/errors.js';
import { hostAllowed, isLoopbackHost, originAllowed, parseListen, requestToken } from './access.js';
import { tokenMatches, type LiveTokens } from './tokens.js';

/*
 * What the live feed's server and the fleet view's server share: who may look (loopback or a
 * token), how an answer and a refusal are written, how the port is opened, which addresses
 * reach it, and how it is closed. Each server adds its own routes on top.
 */

const SECURITY_HEADERS = {
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer',
  'X-Frame-Options': 'DENY',
  'Content-Security-Policy':
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'",
} as const;

const WILDCARDS = new Set(['0.0.0.0', '::', '[::]', '']);

/** Who may open a server's pages and WebSockets. */
export class WebAccess {
  readonly host: string;
  readonly port: number;
  readonly loopback: boolean;

  /**
   * A bind beyond loopback without a viewer token is refused: `what` names the server in the
   * message ("the live feed", "the fleet view").
   */
  constructor(
    readonly listen: string,
    private readonly tokens: LiveTokens,
    readonly origins: readonly string[],
    what: string,
  ) {
    ({ host: this.host, port: this.port } = parseListen(listen));
    this.loopback = isLoopbackHost(this.host);
    if (!this.loopback && !tokens.viewer)
      throw makeError(
        ErrorCodes.LIVE_UNPROTECTED,
        `${what} would be reachable from other machines at ${this.host} without a viewer token`,
        `--listen ${listen}`,
        'Listen on 127.0.0.1, or let cellvigil make its tokens file (docs/live-feed.md "Tokens").',
      );
  }

  /** Loopback binds let anyone on this machine watch; others need the viewer or control token. */
  canView(url: URL, req: IncomingMessage): boolean {
    const token = requestToken(url, req.headers.authorization);
    return (
      this.loopback ||
      tokenMatches(token, this.tokens.viewer) ||
      tokenMatches(token, this.tokens.control)
    );
  }

  hostAllowed(req: IncomingMessage): boolean {
    return hostAllowed(req.headers.host, this.loopback);
  }

  /** Why a WebSocket upgrade may not go on (host, origin, token), or null when it may. */
  upgradeRefusal(url: URL, req: IncomingMessage): Refusal | null {
    if (!this.hostAllowed(req)) return { status: 403, why: 'host header names another machine' };
    if (!originAllowed(req.headers.origin, req.headers.host, this.origins))
      return { status: 403, why: `origin ${req.headers.origin ?? ''} is not this server's page` };
    if (!this.canView(url, req)) return { status: 401, why: 'viewer token missing or wrong' };
    return null;
  }
}

export interface Refusal {
  status: number;
  why: string;
}

/** An HTTP answer with the security headers; a HEAD request gets the headers alone. */
export function reply(
  res: ServerResponse,
  status: number,
  body: string | Buffer,
  contentType = 'text/plain; charset=utf-8',
): void {
  res.writeHead(status, {
    ...SECURITY_HEADERS,
    'Content-Type': contentType,
    'Content-Length': Buffer.byteLength(body),
    'Cache-Control': 'no-store',
  });
  res.end(res.req.method === 'HEAD' ? undefined : body);
}

/** Only GET and HEAD are served; anything else is answered 405 here. True when answered. */
export function refuseMethod(req: IncomingMessage, res: ServerResponse): boolean {
  if (req.method === 'GET' || req.method === 'HEAD') return false;
  res.setHeader('Allow', 'GET, HEAD');
  reply(res, 405, 'Only GET and HEAD are served here.\n');
  return true;
}

/** Ends a WebSocket upgrade that may not go on with a plain HTTP answer saying why. */
export function refuseUpgrade(socket: Duplex, r: Refusal): void {
  socket.end(
    `HTTP/1.1 ${r.status} ${STATUS_CODES[r.status]}\r\nConnection: close\r\nContent-Type: text/plain\r\nContent-Length: ${Buffer.byteLength(r.why) + 1}\r\n\r\n${r.why}\n`,
  );
}

function urlHost(host: string): string {
  return host.includes(':') && !host.startsWith('[') ? `[${host}]` : host;
}

function externalAddresses(): string[] {
  const out: string[] = [];
  for (const list of Object.values(networkInterfaces()))
    for (const a of list ?? []) if (!a.internal && a.family === 'IPv4') out.push(a.address);
  return out;
}

/** An HTTP server on its port, with every socket it has open (upgraded or not). */
export class WebPort {
  readonly server: Server;
  private readonly sockets = new Set<Duplex>();
  private closing: Promise<void> | null = null;

  constructor(onRequest: (req: IncomingMessage, res: ServerResponse) => void) {
    this.server = createServer(onRequest);
    // Kept so close() can end the ones that do not end by themselves.
    this.server.on('connection', (s) => {
      this.sockets.add(s);
      s.once('close', () => this.sockets.delete(s));
    });
  }

  /** Opens the port; `what` names the server in the error ("the live feed"). */
  listen(access: WebAccess, what: string): Promise<void> {
    const { host, port } = access;
    return new Promise<void>((resolve, reject) => {
      this.server.once('error', (e: NodeJS.ErrnoException) =>
        reject(
          makeError(
            ErrorCodes.LIVE_LISTEN,
            `cannot open ${what} on ${host}:${port}: ${e.code ?? e.message}`,
            '--listen',
            'Pick another port (or 0 for any free one), or stop the program that holds it.',
          ),
        ),
      );
      const bind = host === 'localhost' ? '127.0.0.1' : host.replace(/^\[|\]$/g, '');
      this.server.listen(port, bind, () => resolve());
    });
  }

  /** The bound port, the URL from this machine and the URLs other machines may use. */
  urls(access: WebAccess): { port: number; url: string; lanUrls: string[] } {
    const address = this.server.address();
    const port = typeof address === 'object' && address !== null ? address.port : access.port;
    const wildcard = WILDCARDS.has(access.host);
    const localHost = wildcard ? '127.0.0.1' : urlHost(access.host);
    const lanHosts = access.loopback ? [] : wildcard ? externalAddresses() : [urlHost(access.host)];
    return {
      port,
      url: `http://${localHost}:${port}/`,
      lanUrls: lanHosts.map((h) => `http://${h}:${port}/`),
    };
  }

  /**
   * Stops listening once the WebSockets were asked to close. A viewer that does not finish the
   * closing handshake within a second, or a browser holding a keep-alive connection, is cut off
   * (`cutOff` first, then every socket).
   */
  close(wss: WebSocketServer, cutOff: () => void = () => {}): Promise<void> {
    return (this.closing ??= new Promise<void>((resolve) => {
      const force = setTimeout(() => {
        cutOff();
        this.sockets.forEach((s) => s.destroy());
      }, 1000);
      force.unref();
      wss.close();
      this.server.close(() => {
        clearTimeout(force);
        resolve();
      });
      this.server.closeIdleConnections();
    }));
  }
}
