import { readFileSync } from 'node:fs';
import { createServer, type IncomingMessage, type ServerResponse } from 'node:http';
import { join } from 'node:path';
import type { Duplex } from 'node:stream';
import { WebSocket, WebSocketServer } from 'ws';
import { packagePath } from '../core/paths.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import {
  hostAllowed,
  isLoopbackHost,
  originAllowed,
  parseListen,
  requestToken,
} from '../live/access.js';
import { LIVE_VERSION } from '../live/live-types.js';
import { loadStaticFiles, type StaticFile } from '../live/static-files.js';
import { tokenMatches, type LiveTokens } from '../live/tokens.js';
import { textFrame } from '../live/ws-frame.js';
import {
  channelKey,
  tileOf,
  type FleetChange,
  type FleetChannel,
  type FleetState,
} from './fleet-state.js';
import { ChannelViewer, type CommandSender } from './channel-viewer.js';

export interface FleetServerOptions {
  state: FleetState;
  /** `host:port`; port 0 picks a free port. */
  listen: string;
  /** This machine's tokens: the viewer token opens the page beyond loopback. */
  tokenStore: LiveTokens;
  /** Publishes a command to a station (the station checks its own control token). */
  sendCommand: CommandSender;
  origins?: readonly string[];
  /** @default 64 */
  maxViewers?: number;
  log?: (name: string, detail: Record<string, unknown>) => void;
}

export interface FleetServer {
  url: string;
  port: number;
  /** Passes what a broker message changed to the overview pages and drill-downs. */
  changed(change: FleetChange): void;
  close(): Promise<void>;
}

const SECURITY_HEADERS = {
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer',
  'X-Frame-Options': 'DENY',
  'Content-Security-Policy':
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'",
} as const;

/** Bytes waiting on an overview socket past which its updates wait (newest per tile wins). */
const LOW_WATER = 64 * 1024;
/** Past this the overview viewer is cut off: it is not reading. */
const CUT_OFF = 1024 * 1024;

/** The overview page and its assets; the drill-down is the live page itself, at /channel. */
function pageFiles(): Map<string, StaticFile> {
  const live = loadStaticFiles();
  const dir = packagePath('src/fleet/page');
  const files = new Map(live);
  files.set('/channel', live.get('/')!);
  const read = (name: string, contentType: string): StaticFile => ({
    body: readFileSync(join(dir, name)),
    contentType,
  });
  files.set('/', read('fleet.html', 'text/html; charset=utf-8'));
  files.set('/assets/fleet.js', read('fleet.js', 'text/javascript; charset=utf-8'));
  files.set('/assets/fleet.css', read('fleet.css', 'text/css; charset=utf-8'));
  return files;
}

interface OverviewViewer {
  ws: WebSocket;
  /** The connection, which a flush writes its frames to in one write (see ws-frame.ts). */
  socket: Duplex;
  /** Newest message per tile or station, in the order first changed: bounded by the fleet's size. */
  pending: Map<string, Buffer>;
}

/**
 * The fleet view's web side: one page of every station and channel (`/`, WebSocket `/fleet`),
 * and each channel's drill-down (`/channel?station=…&ch=…`, WebSocket `/live?station=…&ch=…`),
 * which is the live page speaking the live feed's protocol. The same access rules as the live
 * feed: loopback or the viewer token to watch; control messages carry the station's control
 * token, which the station checks.
 */
export async function startFleetServer(o: FleetServerOptions): Promise<FleetServer> {
  const { host, port: wantPort } = parseListen(o.listen);
  const loopback = isLoopbackHost(host);
  if (!loopback && !o.tokenStore.viewer)
    throw makeError(
      ErrorCodes.LIVE_UNPROTECTED,
      `the fleet view would be reachable from other machines at ${host} without a viewer token`,
      `--listen ${o.listen}`,
      'Listen on 127.0.0.1, or let cellvigil make its tokens file (docs/live-feed.md "Tokens").',
    );
  const log = o.log ?? (() => {});
  const files = pageFiles();
  const maxViewers = o.maxViewers ?? 64;
  const overview = new Set<OverviewViewer>();
  const drills = new Set<ChannelViewer>();
  const canView = (token: string | null): boolean =>
    loopback ||
    tokenMatches(token, o.tokenStore.viewer) ||
    tokenMatches(token, o.tokenStore.control);

  const server = createServer((req, res) => handleHttp(req, res));
  const sockets = new Set<Duplex>();
  server.on('connection', (s) => {
    sockets.add(s);
    s.once('close', () => sockets.delete(s));
  });
  const wss = new WebSocketServer({ noServer: true, maxPayload: 4096, perMessageDeflate: false });

  function reply(
    res: ServerResponse,
    status: number,
    body: string | Buffer,
    type = 'text/plain; charset=utf-8',
  ): void {
    res.writeHead(status, {
      ...SECURITY_HEADERS,
      'Content-Type': type,
      'Content-Length': Buffer.byteLength(body),
      'Cache-Control': 'no-store',
    });
    res.end(res.req.method === 'HEAD' ? undefined : body);
  }

  function handleHttp(req: IncomingMessage, res: ServerResponse): void {
    const url = new URL(req.url ?? '/', 'http://fleet.invalid');
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.setHeader('Allow', 'GET, HEAD');
      return reply(res, 405, 'Only GET and HEAD are served here.\n');
    }
    if (!hostAllowed(req.headers.host, loopback))
      return reply(res, 403, 'This server answers only to localhost, 127.0.0.1 or [::1].\n');
    const file = files.get(url.pathname);
    if (
      !url.pathname.startsWith('/assets/') &&
      !canView(requestToken(url, req.headers.authorization))
    ) {
      log('fleet_refused', { remote: req.socket.remoteAddress, path: url.pathname });
      res.setHeader('WWW-Authenticate', 'Bearer realm="cellvigil fleet view"');
      return reply(
        res,
        401,
        'A viewer token is needed: open the address with ?token=<viewer token>.\n',
      );
    }
    if (url.pathname === '/api/fleet')
      return reply(res, 200, JSON.stringify(snapshot()), 'application/json; charset=utf-8');
    if (file) return reply(res, 200, file.body, file.contentType);
    return reply(res, 404, 'Not found. The fleet page is at /.\n');
  }

  function snapshot() {
    return {
      type: 'fleet' as const,
      v: LIVE_VERSION,
      stations: [...o.state.stations.values()].map((s) => ({ type: 'station' as const, ...s })),
      tiles: [...o.state.channels.values()].map(tileOf),
    };
  }

  function refuse(socket: Duplex, status: string, why: string, remote: string | undefined): void {
    log('fleet_refused', { remote, why });
    socket.end(
      `HTTP/1.1 ${status}\r\nConnection: close\r\nContent-Type: text/plain\r\nContent-Length: ${Buffer.byteLength(why) + 1}\r\n\r\n${why}\n`,
    );
  }

  server.on('upgrade', (req: IncomingMessage, socket: Duplex, head: Buffer) => {
    socket.on('error', () => socket.destroy());
    const remote = req.socket.remoteAddress;
    const url = new URL(req.url ?? '/', 'http://fleet.invalid');
    if (url.pathname !== '/fleet' && url.pathname !== '/live')
      return refuse(socket, '404 Not Found', 'the WebSockets are /fleet and /live', remote);
    if (!hostAllowed(req.headers.host, loopback))
      return refuse(socket, '403 Forbidden', 'host header names another machine', remote);
    if (!originAllowed(req.headers.origin, req.headers.host, o.origins ?? []))
      return refuse(
        socket,
        '403 Forbidden',
        `origin ${req.headers.origin ?? ''} is not this server's page`,
        remote,
      );
    if (!canView(requestToken(url, req.headers.authorization)))
      return refuse(socket, '401 Unauthorized', 'viewer token missing or wrong', remote);
    if (overview.size + drills.size >= maxViewers)
      return refuse(socket, '503 Service Unavailable', `already ${maxViewers} viewers`, remote);
    let ch: FleetChannel | undefined;
    if (url.pathname === '/live') {
      const n = Number(url.searchParams.get('ch') ?? 'x');
      ch = o.state.channels.get(channelKey(url.searchParams.get('station') ?? '', n));
      if (!ch)
        return refuse(
          socket,
          '404 Not Found',
          'no such station and channel on the broker (yet)',
          remote,
        );
    }
    wss.handleUpgrade(req, socket, head, (ws) =>
      ch ? attachDrill(ws, ch, remote) : attachOverview(ws, socket),
    );
  });

  function attachOverview(ws: WebSocket, socket: Duplex): void {
    const v: OverviewViewer = { ws, socket, pending: new Map() };
    overview.add(v);
    ws.on('close', () => overview.delete(v));
    ws.on('error', () => ws.terminate());
    ws.on('message', () =>
      ws.close(1008, 'the overview takes no messages; control is on a channel page'),
    );
    ws.send(JSON.stringify(snapshot()));
  }

  function attachDrill(ws: WebSocket, ch: FleetChannel, remote: string | undefined): void {
    const d = new ChannelViewer(
      ws,
      ch,
      o.sendCommand,
      `page viewer at ${remote ?? 'an unknown address'}`,
    );
    drills.add(d);
    ws.on('close', () => {
      drills.delete(d);
      d.detach();
    });
  }

  let immediate: NodeJS.Immediate | null = null;
  function flush(): void {
    immediate = null;
    for (const v of overview) {
      if (v.ws.readyState !== WebSocket.OPEN) continue;
      if (v.ws.bufferedAmount > CUT_OFF) {
        log('fleet_viewer_dropped', { why: `more than ${CUT_OFF} bytes waiting` });
        v.ws.terminate();
        continue;
      }
      if (v.ws.bufferedAmount > LOW_WATER || v.pending.size === 0 || !v.socket.writable) continue;
      // Every update of this turn in one write: one system call, not one per tile.
      v.socket.write(Buffer.concat([...v.pending.values()]));
      v.pending.clear();
    }
  }
  // Overview viewers that fell behind are retried even when nothing new comes.
  const sweep = setInterval(() => overview.size > 0 && flush(), 200);
  sweep.unref();

  function offer(key: string, m: unknown): void {
    if (overview.size === 0) return;
    const frame = textFrame(Buffer.from(JSON.stringify(m)));
    for (const v of overview) {
      // A page that keeps up gets the update at once; one behind gets the newest per tile later.
      if (v.pending.size === 0 && v.ws.bufferedAmount <= LOW_WATER && v.socket.writable) {
        v.socket.write(frame);
        continue;
      }
      v.pending.delete(key);
      v.pending.set(key, frame);
      immediate ??= setImmediate(flush);
    }
  }

  await new Promise<void>((resolve, reject) => {
    server.once('error', (e: NodeJS.ErrnoException) =>
      reject(
        makeError(
          ErrorCodes.LIVE_LISTEN,
          `cannot open the fleet view on ${host}:${wantPort}: ${e.code ?? e.message}`,
          '--listen',
          'Pick another port (or 0 for any free one), or stop the program that holds it.',
        ),
      ),
    );
    server.listen(wantPort, host === 'localhost' ? '127.0.0.1' : host.replace(/^\[|\]$/g, ''), () =>
      resolve(),
    );
  });
  const address = server.address();
  const port = typeof address === 'object' && address !== null ? address.port : wantPort;
  const shownHost = ['0.0.0.0', '::', ''].includes(host)
    ? '127.0.0.1'
    : host.includes(':')
      ? `[${host}]`
      : host;

  return {
    url: `http://${shownHost}:${port}/`,
    port,
    changed: (c) => {
      if (!c) return;
      if (c.kind === 'station')
        offer(`station:${c.station.station}`, { type: 'station', ...c.station });
      else if (c.kind === 'reply') drills.forEach((d) => d.reply(c.reply));
      else offer(`tile:${c.channel.key}`, tileOf(c.channel));
    },
    close: () =>
      new Promise<void>((resolve) => {
        clearInterval(sweep);
        if (immediate) clearImmediate(immediate);
        for (const d of drills) d.detach();
        for (const v of [...overview, ...drills].map((x) => x.ws))
          v.close(1001, 'the fleet view is stopping');
        const force = setTimeout(() => sockets.forEach((s) => s.destroy()), 1000);
        force.unref();
        wss.close();
        server.close(() => {
          clearTimeout(force);
          resolve();
        });
        server.closeIdleConnections();
      }),
  };
}
