import type { IncomingMessage, ServerResponse } from 'node:http';
import type { Duplex } from 'node:stream';
import { WebSocketServer, type RawData, type WebSocket } from 'ws';
import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock } from '../core/host-clock.js';
import type { LiveFeedEvent } from '../record/events.js';
import { readControl } from './control-intake.js';
import { FeedRouter, type ViewerFeed } from './feed-router.js';
import type { LiveHub } from './live-hub.js';
import { LIVE_VERSION, type BroadcastMessage } from './live-types.js';
import { loadStaticFiles, type StaticFile } from './static-files.js';
import type { StationFeed } from './station-feed.js';
import { throttled } from './throttled-log.js';
import { tokenMatches, type LiveTokens } from './tokens.js';
import { ViewerFanout, type Viewer, type ViewerStats } from './viewer-fanout.js';
import { ViewerQueue, type ViewerQueueOptions } from './viewer-queue.js';
import {
  refuseMethod,
  refuseUpgrade,
  reply,
  WebAccess,
  WebPort,
  type Refusal,
} from './web-port.js';

export type { ViewerStats } from './viewer-fanout.js';

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

export interface LiveServer {
  /** The URL that reaches the page from this machine. */
  url: string;
  /** URLs other machines may use (the bound address, or every external interface for a wildcard bind). */
  lanUrls: string[];
  port: number;
  viewers(): ViewerStats[];
  close(): Promise<void>;
}

const WHAT = 'the live feed';

/**
 * The live feed on one HTTP port: the page and its assets, a JSON snapshot, and the
 * WebSocket `/live`. Control always needs the control token; a bind beyond loopback needs the
 * viewer token for everything but the static assets, and is refused without one.
 */
export async function startLiveServer(o: LiveServerOptions): Promise<LiveServer> {
  const feed = new LiveFeedServer(o);
  await feed.port.listen(feed.access, WHAT);
  return feed.start();
}

/** The live feed's routes, viewers and timers; startLiveServer opens it. */
class LiveFeedServer {
  readonly access: WebAccess;
  readonly port: WebPort;
  private readonly router: FeedRouter;
  private readonly clock: Clock;
  private readonly rawLog: (e: LiveFeedEvent) => void;
  private readonly log: (e: LiveFeedEvent) => void;
  private readonly files: Map<string, StaticFile>;
  private readonly fanout: ViewerFanout;
  private readonly wss: WebSocketServer;

  constructor(private readonly o: LiveServerOptions) {
    this.access = new WebAccess(o.listen, o.tokenStore, o.origins ?? [], WHAT);
    this.router = new FeedRouter(o);
    this.clock = o.clock ?? new HostClock();
    this.rawLog = o.log ?? (() => {});
    this.log = throttled(this.rawLog, this.clock);
    this.files = loadStaticFiles();
    this.fanout = new ViewerFanout(this.clock, this.log);
    this.wss = new WebSocketServer({
      noServer: true,
      maxPayload: o.maxPayloadBytes ?? 4096,
      perMessageDeflate: false,
    });
    this.port = new WebPort((req, res) => this.handleHttp(req, res));
    this.port.server.on('upgrade', (req: IncomingMessage, socket: Duplex, head: Buffer) =>
      this.upgrade(req, socket, head),
    );
  }

  /** Once listening: follows the feed, starts the timers, and hands out the server's face. */
  start(): LiveServer {
    this.port.server.on('error', (e) => this.log({ event: 'live_error', why: e.message }));
    const unsubscribe = this.router.subscribe((m) => this.deliver(m));
    const timers = this.startTimers();
    const fanout = this.fanout;
    return {
      ...this.port.urls(this.access),
      viewers: () => fanout.stats(),
      close: () => {
        timers.forEach((t) => this.clock.clearTimer(t));
        unsubscribe();
        // What is queued (the run's result, say) goes out before the closing frame.
        fanout.flush();
        for (const v of fanout.viewers) v.ws.close(1001, 'the daemon is stopping');
        return this.port.close(this.wss, () => fanout.viewers.forEach((v) => v.ws.terminate()));
      },
    };
  }

  private startTimers(): TimerHandle[] {
    const { clock, fanout, router, o } = this;
    const overview = (): void => {
      const station = router.station;
      if (station) fanout.broadcast(station.overview(), (v) => 'station' in v.feed);
    };
    return [
      clock.setTimer(() => fanout.sweep(), o.sweepMs ?? 200, true),
      ...(router.station ? [clock.setTimer(overview, o.overviewMs ?? 500, true)] : []),
      clock.setTimer(() => fanout.ping(), o.pingMs ?? 30_000, true),
    ];
  }

  /** The static page and assets, and the JSON snapshot at /api/state. */
  private handleHttp(req: IncomingMessage, res: ServerResponse): void {
    const url = new URL(req.url ?? '/', 'http://live.invalid');
    if (refuseMethod(req, res)) return;
    const refused = (why: string): void =>
      this.log({
        event: 'live_refused',
        remote: req.socket.remoteAddress,
        path: url.pathname,
        why,
      });
    if (!this.access.hostAllowed(req)) {
      refused('host header names another machine');
      return reply(res, 403, 'This server answers only to localhost, 127.0.0.1 or [::1].\n');
    }
    const file = this.files.get(this.router.pagePath(url));
    const guarded = !url.pathname.startsWith('/assets/') && (file || url.pathname === '/api/state');
    if (guarded && !this.access.canView(url, req)) {
      refused('viewer token missing or wrong');
      res.setHeader('WWW-Authenticate', 'Bearer realm="cellvigil live feed"');
      return reply(
        res,
        401,
        'A viewer token is needed: open the address with ?token=<viewer token> (see docs/live-feed.md).\n',
      );
    }
    if (url.pathname === '/api/state') {
      const feed = this.router.feedFor(url);
      if (!feed) return reply(res, 404, 'This station has no such channel.\n');
      const body = JSON.stringify(FeedRouter.greeting(feed));
      return reply(res, 200, body, 'application/json; charset=utf-8');
    }
    if (file) return reply(res, 200, file.body, file.contentType);
    return reply(res, 404, 'Not found. The live page is at /.\n');
  }

  /** The WebSocket /live: checked for host, origin, token, room and channel before it opens. */
  private upgrade(req: IncomingMessage, socket: Duplex, head: Buffer): void {
    socket.on('error', () => socket.destroy());
    const remote = req.socket.remoteAddress;
    const url = new URL(req.url ?? '/', 'http://live.invalid');
    const feed = this.router.feedFor(url);
    const maxViewers = this.o.maxViewers ?? 64;
    const refusal: Refusal | null =
      url.pathname !== '/live'
        ? { status: 404, why: 'the WebSocket is at /live' }
        : (this.access.upgradeRefusal(url, req) ??
          (this.fanout.viewers.size >= maxViewers
            ? { status: 503, why: `already ${maxViewers} viewers` }
            : !feed
              ? { status: 404, why: 'this station has no such channel' }
              : null));
    if (refusal) {
      this.log({ event: 'live_refused', remote, path: '/live', why: refusal.why });
      return refuseUpgrade(socket, refusal);
    }
    this.wss.handleUpgrade(req, socket, head, (ws) =>
      this.attach(ws, socket, remote ?? 'unknown', feed!),
    );
  }

  private attach(ws: WebSocket, socket: Duplex, remote: string, feed: ViewerFeed): void {
    const viewers = this.fanout.viewers;
    const v: Viewer = {
      ws,
      feed,
      socket,
      queue: new ViewerQueue(this.o.queue),
      remote,
      alive: true,
    };
    viewers.add(v);
    this.log({ event: 'live_viewer_joined', remote, viewers: viewers.size });
    let why = 'closed by the viewer';
    ws.on('pong', () => (v.alive = true));
    ws.on('error', (e) => (why = e.message));
    ws.on('close', (code) => {
      viewers.delete(v);
      const coalesced = v.queue.coalesced;
      this.log({ event: 'live_viewer_left', remote, code, why, coalesced, viewers: viewers.size });
    });
    ws.on('message', (data, isBinary) => this.onMessage(v, data, isBinary));
    this.fanout.send(v, FeedRouter.greeting(feed));
  }

  /** A control request: checked, its token matched, routed, answered and logged. */
  private onMessage(v: Viewer, data: RawData, isBinary: boolean): void {
    const m = readControl(data, isBinary);
    const fail = (code: 'malformed' | 'unauthorized' | 'refused', error: string): void =>
      this.fanout.send(v, { type: 'error', v: LIVE_VERSION, id: m.id, code, error });
    if (!m.ok) return fail(m.code, m.error);
    if (!tokenMatches(m.message.token, this.o.tokenStore.control)) {
      const why = 'control token missing or wrong';
      this.log({
        event: 'live_control',
        remote: v.remote,
        request: m.request.type,
        ok: false,
        why,
      });
      return fail('unauthorized', 'the control token is missing or wrong');
    }
    const r = this.router.control(v.feed, m.request, m.message.channel);
    // A request that passed the token check is always logged: it is the user's own.
    this.rawLog({
      event: 'live_control',
      remote: v.remote,
      ...m.request,
      ok: r.ok,
      ...(r.ok ? {} : { why: r.error }),
    });
    if (r.ok)
      this.fanout.send(v, { type: 'ack', v: LIVE_VERSION, id: m.id, request: m.request.type });
    else fail('refused', r.error);
  }

  private deliver(m: BroadcastMessage): void {
    if (this.fanout.viewers.size === 0) return;
    this.fanout.broadcast(m, (v) => this.router.wants(v.feed, m));
  }
}
