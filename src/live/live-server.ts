import type { LiveFeedEvent } from '../record/events.js';
import { createServer, type IncomingMessage, type ServerResponse } from 'node:http';
import { networkInterfaces } from 'node:os';
import { performance } from 'node:perf_hooks';
import type { Duplex } from 'node:stream';
import { WebSocket, WebSocketServer, type RawData } from 'ws';
import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock } from '../core/host-clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { hostAllowed, isLoopbackHost, originAllowed, parseListen, requestToken } from './access.js';
import type { LiveHub } from './live-hub.js';
import type { StationFeed } from './station-feed.js';
import {
  LIVE_VERSION,
  type BroadcastMessage,
  type LiveErrorCode,
  type ServerMessage,
  type StationControlRequest,
} from './live-types.js';
import { checkClientMessage } from './message-schemas.js';
import { loadStaticFiles } from './static-files.js';
import { tokenMatches, type LiveTokens } from './tokens.js';
import { ViewerQueue, type ViewerQueueOptions } from './viewer-queue.js';
import { textFrame } from './ws-frame.js';

export interface LiveServerOptions {
  /** A one-channel run's feed; give this or `station`. */
  hub?: LiveHub;
  /** A station's feed: every channel's hub and the overview (docs/live-feed.md, "Stations"). */
  station?: StationFeed;
  /** How often overview viewers of a station get the `station` message, ms. @default 500 */
  overviewMs?: number;
  /** `host:port`; port 0 picks a free port. */
  listen: string;
  tokenStore: LiveTokens;
  /** Further page origins allowed to open the WebSocket (for example a reverse proxy's). */
  origins?: readonly string[];
  /** Where the server gets time for queue stalls and its sweep. @default HostClock */
  clock?: Clock;
  queue?: ViewerQueueOptions;
  /** Largest message a viewer may send, bytes. @default 4096 */
  maxPayloadBytes?: number;
  /** Viewers at once; more are refused. @default 64 */
  maxViewers?: number;
  /** How often slow viewers' queues are retried and checked for stalls, ms. @default 200 */
  sweepMs?: number;
  /** Ping period; a viewer that has not answered the previous ping is cut off, ms. @default 30000 */
  pingMs?: number;
  /** Receives viewer arrivals, departures, refusals and control requests (for the event log). */
  log?: (e: LiveFeedEvent) => void;
}

export interface ViewerStats {
  remote: string;
  queued: number;
  queuedBytes: number;
  bufferedAmount: number;
  coalesced: number;
}

export interface LiveServer {
  /** The URL that reaches the page from this machine. */
  url: string;
  /** URLs other machines may use (the bound address, or every external interface for a wildcard bind). */
  lanUrls: string[];
  port: number;
  viewers(): ViewerStats[];
  close(): Promise<void>;
}

/**
 * A message on its way to viewers: serialised once for all of them, and only when one of them
 * is actually sent it. Samples that a viewer's queue coalesces away are never serialised.
 */
class Outgoing {
  private bytes: Buffer | null = null;
  private framed: Buffer | null = null;

  constructor(readonly message: ServerMessage) {}

  /** Samples and station overviews: only the newest is worth sending to a viewer behind. */
  get isSample(): boolean {
    return this.message.type === 'sample' || this.message.type === 'station';
  }

  /** UTF-8 bytes of the JSON text, made once however many viewers get them. */
  get data(): Buffer {
    return (this.bytes ??= Buffer.from(JSON.stringify(this.message)));
  }

  /** The whole WebSocket frame, the same bytes for every viewer. */
  get frame(): Buffer {
    return (this.framed ??= textFrame(this.data));
  }

  /** What the viewer queue counts its bounds in. */
  get length(): number {
    return this.data.length;
  }
}

/** Shortest gap between two sample sends, ms: at most 100 samples a second reach a viewer. */
const SAMPLE_GAP_MS = 10;

/** What a viewer follows: one channel's hub, or a station's overview. */
type ViewerFeed = { hub: LiveHub } | { station: StationFeed };

interface Viewer {
  ws: WebSocket;
  feed: ViewerFeed;
  /** The viewer's connection, which broadcast frames are written to directly (see ws-frame.ts). */
  socket: Duplex;
  queue: ViewerQueue<Outgoing>;
  remote: string;
  alive: boolean;
}

const SECURITY_HEADERS = {
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer',
  'X-Frame-Options': 'DENY',
  'Content-Security-Policy':
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'",
} as const;

const WILDCARDS = new Set(['0.0.0.0', '::', '[::]', '']);

function urlHost(host: string): string {
  return host.includes(':') && !host.startsWith('[') ? `[${host}]` : host;
}

/**
 * At most 30 feed events a minute reach the event log; the rest are counted and reported in one
 * line, so someone hammering the port cannot grow the log without bound.
 */
function throttled(log: (e: LiveFeedEvent) => void, clock: Clock, perMinute = 30) {
  let windowStart = clock.now();
  let count = 0;
  let suppressed = 0;
  return (e: LiveFeedEvent): void => {
    const now = clock.now();
    if (now - windowStart >= 60_000) {
      if (suppressed > 0)
        log({
          event: 'live_events_suppressed',
          count: suppressed,
          seconds: Math.round((now - windowStart) / 1000),
        });
      windowStart = now;
      count = 0;
      suppressed = 0;
    }
    if (count++ < perMinute) log(e);
    else suppressed++;
  };
}

function externalAddresses(): string[] {
  const out: string[] = [];
  for (const list of Object.values(networkInterfaces()))
    for (const a of list ?? []) if (!a.internal && a.family === 'IPv4') out.push(a.address);
  return out;
}

/**
 * The live feed on one HTTP port: the page and its assets, a JSON snapshot, and the
 * WebSocket `/live`. Control always needs the control token; a bind beyond loopback needs the
 * viewer token for everything but the static assets, and is refused without one.
 */
export async function startLiveServer(o: LiveServerOptions): Promise<LiveServer> {
  const { host, port: wantPort } = parseListen(o.listen);
  const loopback = isLoopbackHost(host);
  const tokens = o.tokenStore;
  if (!loopback && !tokens.viewer)
    throw makeError(
      ErrorCodes.LIVE_UNPROTECTED,
      `the live feed would be reachable from other machines at ${host} without a viewer token`,
      `--listen ${o.listen}`,
      'Listen on 127.0.0.1, or let cellvigil make its tokens file (docs/live-feed.md "Tokens").',
    );
  if ((o.hub === undefined) === (o.station === undefined))
    throw new Error('the live server follows one run (hub) or one station, not both or neither');
  const station = o.station ?? null;
  /** What a request asks to follow; null when it names a channel the station does not have. */
  const feedFor = (url: URL): ViewerFeed | null => {
    if (!station) return { hub: o.hub! };
    if (url.searchParams.get('view') === 'station') return { station };
    // Without a channel, a viewer made for one run follows the station's first channel.
    const key = url.searchParams.get('channel') ?? station.keys()[0];
    const hub = key !== undefined ? station.hub(key) : undefined;
    return hub ? { hub } : null;
  };
  const clock = o.clock ?? new HostClock();
  const rawLog = o.log ?? (() => {});
  const log = throttled(rawLog, clock);
  const files = loadStaticFiles();
  const maxViewers = o.maxViewers ?? 64;
  const viewers = new Set<Viewer>();

  const canView = (token: string | null): boolean =>
    loopback || tokenMatches(token, tokens.viewer) || tokenMatches(token, tokens.control);

  const server = createServer((req, res) => handleHttp(req, res));
  // Every socket, upgraded or not, so close() can end the ones that do not end by themselves.
  const sockets = new Set<Duplex>();
  server.on('connection', (s) => {
    sockets.add(s);
    s.once('close', () => sockets.delete(s));
  });
  const wss = new WebSocketServer({
    noServer: true,
    maxPayload: o.maxPayloadBytes ?? 4096,
    perMessageDeflate: false,
  });

  function reply(
    res: ServerResponse,
    status: number,
    body: string | Buffer,
    contentType = 'text/plain; charset=utf-8',
    head = false,
  ): void {
    res.writeHead(status, {
      ...SECURITY_HEADERS,
      'Content-Type': contentType,
      'Content-Length': Buffer.byteLength(body),
      'Cache-Control': 'no-store',
    });
    res.end(head ? undefined : body);
  }

  function handleHttp(req: IncomingMessage, res: ServerResponse): void {
    const url = new URL(req.url ?? '/', 'http://live.invalid');
    const head = req.method === 'HEAD';
    if (req.method !== 'GET' && !head) {
      res.setHeader('Allow', 'GET, HEAD');
      return reply(res, 405, 'Only GET and HEAD are served here.\n');
    }
    if (!hostAllowed(req.headers.host, loopback)) {
      log({
        event: 'live_refused',
        remote: req.socket.remoteAddress,
        path: url.pathname,
        why: 'host header names another machine',
      });
      return reply(res, 403, 'This server answers only to localhost, 127.0.0.1 or [::1].\n');
    }
    // A station's address opens its overview; `?channel=<rig>/<n>` opens that channel's page.
    const overviewHere = station && url.pathname === '/' && !url.searchParams.has('channel');
    const file = files.get(overviewHere ? '/station' : url.pathname);
    const isAsset = url.pathname.startsWith('/assets/');
    if (
      !isAsset &&
      (file || url.pathname === '/api/state') &&
      !canView(requestToken(url, req.headers.authorization))
    ) {
      log({
        event: 'live_refused',
        remote: req.socket.remoteAddress,
        path: url.pathname,
        why: 'viewer token missing or wrong',
      });
      res.setHeader('WWW-Authenticate', 'Bearer realm="cellvigil live feed"');
      return reply(
        res,
        401,
        'A viewer token is needed: open the address with ?token=<viewer token> (see docs/live-feed.md).\n',
      );
    }
    if (url.pathname === '/api/state') {
      const feed = feedFor(url);
      if (!feed) return reply(res, 404, 'This station has no such channel.\n');
      return reply(
        res,
        200,
        JSON.stringify('hub' in feed ? feed.hub.hello() : feed.station.overview()),
        'application/json; charset=utf-8',
        head,
      );
    }
    if (file) return reply(res, 200, file.body, file.contentType, head);
    return reply(res, 404, 'Not found. The live page is at /.\n');
  }

  function refuseUpgrade(
    socket: Duplex,
    status: number,
    text: string,
    why: string,
    remote: string | undefined,
  ): void {
    log({ event: 'live_refused', remote, path: '/live', why });
    socket.end(
      `HTTP/1.1 ${status} ${text}\r\nConnection: close\r\nContent-Type: text/plain\r\nContent-Length: ${Buffer.byteLength(why) + 1}\r\n\r\n${why}\n`,
    );
  }

  server.on('upgrade', (req: IncomingMessage, socket: Duplex, headBytes: Buffer) => {
    socket.on('error', () => socket.destroy());
    const remote = req.socket.remoteAddress;
    const url = new URL(req.url ?? '/', 'http://live.invalid');
    if (url.pathname !== '/live')
      return refuseUpgrade(socket, 404, 'Not Found', 'the WebSocket is at /live', remote);
    if (!hostAllowed(req.headers.host, loopback))
      return refuseUpgrade(socket, 403, 'Forbidden', 'host header names another machine', remote);
    if (!originAllowed(req.headers.origin, req.headers.host, o.origins ?? []))
      return refuseUpgrade(
        socket,
        403,
        'Forbidden',
        `origin ${req.headers.origin ?? ''} is not this server's page`,
        remote,
      );
    if (!canView(requestToken(url, req.headers.authorization)))
      return refuseUpgrade(socket, 401, 'Unauthorized', 'viewer token missing or wrong', remote);
    if (viewers.size >= maxViewers)
      return refuseUpgrade(
        socket,
        503,
        'Service Unavailable',
        `already ${maxViewers} viewers`,
        remote,
      );
    const feed = feedFor(url);
    if (!feed)
      return refuseUpgrade(socket, 404, 'Not Found', 'this station has no such channel', remote);
    wss.handleUpgrade(req, socket, headBytes, (ws) =>
      attach(ws, socket, remote ?? 'unknown', feed),
    );
  });

  function attach(ws: WebSocket, socket: Duplex, remote: string, feed: ViewerFeed): void {
    const v: Viewer = { ws, feed, socket, queue: new ViewerQueue(o.queue), remote, alive: true };
    viewers.add(v);
    log({ event: 'live_viewer_joined', remote, viewers: viewers.size });
    let leaveWhy = 'closed by the viewer';
    ws.on('pong', () => (v.alive = true));
    ws.on('error', (e) => (leaveWhy = e.message));
    ws.on('close', (code) => {
      viewers.delete(v);
      log({
        event: 'live_viewer_left',
        remote,
        code,
        why: leaveWhy,
        coalesced: v.queue.coalesced,
        viewers: viewers.size,
      });
    });
    ws.on('message', (data, isBinary) => onMessage(v, data, isBinary));
    send(v, 'hub' in feed ? feed.hub.hello() : feed.station.overview());
  }

  function fail(v: Viewer, id: string | null, code: LiveErrorCode, error: string): void {
    send(v, { type: 'error', v: LIVE_VERSION, id, code, error });
  }

  function onMessage(v: Viewer, data: RawData, isBinary: boolean): void {
    if (isBinary) return fail(v, null, 'malformed', 'messages are JSON text');
    let parsed: unknown;
    try {
      parsed = JSON.parse(data.toString());
    } catch {
      return fail(v, null, 'malformed', 'the message is not JSON');
    }
    const rawId = (parsed as { id?: unknown } | null)?.id;
    const id = typeof rawId === 'string' && rawId.length <= 64 ? rawId : null;
    const checked = checkClientMessage(parsed);
    if (!checked.ok) return fail(v, id, 'malformed', checked.error);
    const m = checked.value;
    if (!tokenMatches(m.token, tokens.control)) {
      log({
        event: 'live_control',
        remote: v.remote,
        request: m.type,
        ok: false,
        why: 'control token missing or wrong',
      });
      return fail(v, id, 'unauthorized', 'the control token is missing or wrong');
    }
    const request: StationControlRequest =
      m.type === 'stop'
        ? { type: m.type }
        : m.type === 'set-cutoff'
          ? { type: m.type, cutoff_V: m.cutoff_V, ...(m.confirm ? { confirm: true } : {}) }
          : m.type === 'mark'
            ? { type: m.type, note: m.note }
            : { type: m.type, ...(m.cell_id !== undefined ? { cell_id: m.cell_id } : {}) };
    const r = controlFor(v, request, m.channel);
    // A request that passed the token check is always logged: it is the user's own.
    rawLog({
      event: 'live_control',
      remote: v.remote,
      ...request,
      ok: r.ok,
      ...(r.ok ? {} : { why: r.error }),
    });
    if (r.ok) send(v, { type: 'ack', v: LIVE_VERSION, id, request: m.type });
    else fail(v, id, 'refused', r.error);
  }

  /** A station routes a request by the channel it names, else the one the viewer follows. */
  function controlFor(
    v: Viewer,
    request: StationControlRequest,
    channel: string | undefined,
  ): { ok: true } | { ok: false; error: string } {
    if (!station) {
      if (request.type === 'start')
        return { ok: false, error: 'start is for the channels of a station; this run has one' };
      return o.hub!.control(request);
    }
    const key = channel ?? ('hub' in v.feed ? v.feed.hub.channel : undefined);
    if (key === undefined)
      return { ok: false, error: 'say which channel the request is for ("channel")' };
    return station.control(key, request);
  }

  // Sends happen once per event-loop turn: a burst of samples read in one chunk from the rig
  // reaches each viewer as its newest sample, in one socket write, instead of one write each.
  // Samples go out at most every SAMPLE_GAP_MS as well: no page draws faster, and a socket
  // write costs the daemon more than a frame does. Everything else goes out in the same turn.
  const dirty = new Set<Viewer>();
  let immediate: NodeJS.Immediate | null = null;
  let later: NodeJS.Timeout | null = null;
  let lastFlushAt = -Infinity;
  function flush(): void {
    if (immediate) clearImmediate(immediate);
    if (later) clearTimeout(later);
    immediate = later = null;
    lastFlushAt = performance.now();
    for (const v of dirty) pump(v);
    dirty.clear();
  }

  function offer(v: Viewer, out: Outgoing): void {
    v.queue.offer(out, out.isSample);
    dirty.add(v);
  }

  /** Once per message, however many viewers it was offered to. */
  function schedule(out: Outgoing): void {
    const wait = out.isSample ? lastFlushAt + SAMPLE_GAP_MS - performance.now() : 0;
    if (wait <= 0) immediate ??= setImmediate(flush);
    else if (!immediate) later ??= setTimeout(flush, wait);
  }

  /** A message for one viewer (its hello, an answer to its request). */
  function send(v: Viewer, m: ServerMessage): void {
    const out = new Outgoing(m);
    offer(v, out);
    schedule(out);
  }

  function pump(v: Viewer): void {
    if (v.ws.readyState !== WebSocket.OPEN) return;
    for (;;) {
      const step = v.queue.next(v.ws.bufferedAmount, clock.now());
      if (step === null) return;
      if ('disconnect' in step) {
        log({ event: 'live_viewer_dropped', remote: v.remote, why: step.disconnect });
        v.ws.terminate();
        return;
      }
      // Whole frames on the open connection, in order with the library's own (pings, close).
      if (!v.socket.writable) return;
      v.socket.write(step.send.frame);
    }
  }

  /**
   * A channel's viewer gets its channel's messages; an overview viewer gets every channel's
   * events as they happen, its samples through the periodic overview instead.
   */
  const wants = (v: Viewer, m: BroadcastMessage): boolean =>
    'hub' in v.feed
      ? station === null || m.channel === v.feed.hub.channel
      : m.type !== 'sample' && m.type !== 'hello';
  const deliver = (m: BroadcastMessage): void => {
    if (viewers.size === 0) return;
    const out = new Outgoing(m);
    let offered = false;
    for (const v of viewers) {
      if (!wants(v, m)) continue;
      offer(v, out);
      offered = true;
    }
    if (offered) schedule(out);
  };
  const unsubscribe = station ? station.subscribe(deliver) : o.hub!.subscribe(deliver);
  const sendOverview = (): void => {
    if (!station) return;
    let out: Outgoing | null = null;
    for (const v of viewers) {
      if (!('station' in v.feed)) continue;
      out ??= new Outgoing(station.overview());
      offer(v, out);
    }
    if (out) schedule(out);
  };

  const timers: TimerHandle[] = [
    clock.setTimer(() => viewers.forEach(pump), o.sweepMs ?? 200, true),
    ...(station ? [clock.setTimer(sendOverview, o.overviewMs ?? 500, true)] : []),
    clock.setTimer(
      () => {
        for (const v of viewers) {
          if (!v.alive) {
            log({ event: 'live_viewer_dropped', remote: v.remote, why: 'no answer to ping' });
            v.ws.terminate();
            continue;
          }
          v.alive = false;
          v.ws.ping();
        }
      },
      o.pingMs ?? 30_000,
      true,
    ),
  ];

  await new Promise<void>((resolve, reject) => {
    server.once('error', (e: NodeJS.ErrnoException) => {
      timers.forEach((t) => clock.clearTimer(t));
      unsubscribe();
      reject(
        makeError(
          ErrorCodes.LIVE_LISTEN,
          `cannot open the live feed on ${host}:${wantPort}: ${e.code ?? e.message}`,
          '--listen',
          'Pick another port (or 0 for any free one), or stop the program that holds it.',
        ),
      );
    });
    server.listen(wantPort, host === 'localhost' ? '127.0.0.1' : host.replace(/^\[|\]$/g, ''), () =>
      resolve(),
    );
  });
  server.on('error', (e) => log({ event: 'live_error', why: e.message }));

  const address = server.address();
  const port = typeof address === 'object' && address !== null ? address.port : wantPort;
  const wildcard = WILDCARDS.has(host);
  const localHost = wildcard ? '127.0.0.1' : urlHost(host);
  const lanHosts = loopback ? [] : wildcard ? externalAddresses() : [urlHost(host)];

  let closing: Promise<void> | null = null;
  return {
    url: `http://${localHost}:${port}/`,
    lanUrls: lanHosts.map((h) => `http://${h}:${port}/`),
    port,
    viewers: () =>
      [...viewers].map((v) => ({
        remote: v.remote,
        queued: v.queue.length,
        queuedBytes: v.queue.bytes,
        bufferedAmount: v.ws.bufferedAmount,
        coalesced: v.queue.coalesced,
      })),
    close: () =>
      (closing ??= new Promise<void>((resolve) => {
        timers.forEach((t) => clock.clearTimer(t));
        unsubscribe();
        // What is queued (the run's result, say) goes out before the closing frame.
        flush();
        for (const v of viewers) v.ws.close(1001, 'the daemon is stopping');
        // A viewer that does not finish the closing handshake promptly, or a browser holding a
        // keep-alive connection, is cut off.
        const force = setTimeout(() => {
          viewers.forEach((v) => v.ws.terminate());
          sockets.forEach((s) => s.destroy());
        }, 1000);
        force.unref();
        wss.close();
        server.close(() => {
          clearTimeout(force);
          resolve();
        });
        server.closeIdleConnections();
      })),
  };
}
