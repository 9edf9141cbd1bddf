import { readFileSync } from 'node:fs';
import type { IncomingMessage, ServerResponse } from 'node:http';
import { join } from 'node:path';
import type { Duplex } from 'node:stream';
import { WebSocketServer, type WebSocket } from 'ws';
import { packagePath } from '../core/paths.js';
import { LIVE_VERSION } from '../live/live-types.js';
import { loadStaticFiles, type StaticFile } from '../live/static-files.js';
import type { LiveTokens } from '../live/tokens.js';
import {
  refuseMethod,
  refuseUpgrade,
  reply,
  WebAccess,
  WebPort,
  type Refusal,
} from '../live/web-port.js';
import { ChannelViewer, type CommandSender } from './channel-viewer.js';
import {
  channelKey,
  tileOf,
  type FleetChange,
  type FleetChannel,
  type FleetState,
} from './fleet-state.js';
import { OverviewFanout } from './overview-fanout.js';

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

const WHAT = 'the fleet view';

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

/**
 * The fleet view's web side: one page of every station and channel (`/`, WebSocket `/fleet`),
 * and each channel's drill-down (`/channel?station=…&ch=…`, WebSocket `/live?station=…&ch=…`),
 * which is the live page speaking the live feed's protocol. The same access rules as the live
 * feed: loopback or the viewer token to watch; control messages carry the station's control
 * token, which the station checks.
 */
export async function startFleetServer(o: FleetServerOptions): Promise<FleetServer> {
  const web = new FleetWebServer(o);
  await web.port.listen(web.access, WHAT);
  const { url, port } = web.port.urls(web.access);
  return { url, port, changed: (c) => web.changed(c), close: () => web.close() };
}

/** The fleet view's routes and viewers; startFleetServer opens it. */
class FleetWebServer {
  readonly access: WebAccess;
  readonly port: WebPort;
  private readonly log: (name: string, detail: Record<string, unknown>) => void;
  private readonly files = pageFiles();
  private readonly overview: OverviewFanout;
  private readonly drills = new Set<ChannelViewer>();
  private readonly wss: WebSocketServer;

  constructor(private readonly o: FleetServerOptions) {
    this.access = new WebAccess(o.listen, o.tokenStore, o.origins ?? [], WHAT);
    this.log = o.log ?? (() => {});
    this.overview = new OverviewFanout(this.log);
    this.wss = new WebSocketServer({ noServer: true, maxPayload: 4096, perMessageDeflate: false });
    this.port = new WebPort((req, res) => this.handleHttp(req, res));
    this.port.server.on('upgrade', (req: IncomingMessage, socket: Duplex, head: Buffer) =>
      this.upgrade(req, socket, head),
    );
  }

  changed(c: FleetChange): void {
    if (!c) return;
    if (c.kind === 'station')
      this.overview.offer(`station:${c.station.station}`, { type: 'station', ...c.station });
    else if (c.kind === 'reply') this.drills.forEach((d) => d.reply(c.reply));
    else this.overview.offer(`tile:${c.channel.key}`, tileOf(c.channel));
  }

  close(): Promise<void> {
    const why = 'the fleet view is stopping';
    this.overview.close(why);
    for (const d of this.drills) d.detach();
    for (const d of this.drills) d.ws.close(1001, why);
    return this.port.close(this.wss);
  }

  private snapshot() {
    return {
      type: 'fleet' as const,
      v: LIVE_VERSION,
      stations: [...this.o.state.stations.values()].map((s) => ({
        type: 'station' as const,
        ...s,
      })),
      tiles: [...this.o.state.channels.values()].map(tileOf),
    };
  }

  private handleHttp(req: IncomingMessage, res: ServerResponse): void {
    const url = new URL(req.url ?? '/', 'http://fleet.invalid');
    if (refuseMethod(req, res)) return;
    if (!this.access.hostAllowed(req))
      return reply(res, 403, 'This server answers only to localhost, 127.0.0.1 or [::1].\n');
    if (!url.pathname.startsWith('/assets/') && !this.access.canView(url, req)) {
      this.log('fleet_refused', { remote: req.socket.remoteAddress, path: url.pathname });
      res.setHeader('WWW-Authenticate', 'Bearer realm="cellvigil fleet view"');
      const text = 'A viewer token is needed: open the address with ?token=<viewer token>.\n';
      return reply(res, 401, text);
    }
    if (url.pathname === '/api/fleet')
      return reply(res, 200, JSON.stringify(this.snapshot()), 'application/json; charset=utf-8');
    const file = this.files.get(url.pathname);
    if (file) return reply(res, 200, file.body, file.contentType);
    return reply(res, 404, 'Not found. The fleet page is at /.\n');
  }

  /** Why a WebSocket may not open: a wrong path, access, room, or an unknown channel. */
  private refusal(url: URL, req: IncomingMessage, ch: FleetChannel | undefined): Refusal | null {
    const max = this.o.maxViewers ?? 64;
    if (url.pathname !== '/fleet' && url.pathname !== '/live')
      return { status: 404, why: 'the WebSockets are /fleet and /live' };
    const denied = this.access.upgradeRefusal(url, req);
    if (denied) return denied;
    if (this.overview.size + this.drills.size >= max)
      return { status: 503, why: `already ${max} viewers` };
    if (url.pathname === '/live' && !ch)
      return { status: 404, why: 'no such station and channel on the broker (yet)' };
    return null;
  }

  private upgrade(req: IncomingMessage, socket: Duplex, head: Buffer): void {
    socket.on('error', () => socket.destroy());
    const url = new URL(req.url ?? '/', 'http://fleet.invalid');
    const ch =
      url.pathname === '/live'
        ? this.o.state.channels.get(
            channelKey(
              url.searchParams.get('station') ?? '',
              Number(url.searchParams.get('ch') ?? 'x'),
            ),
          )
        : undefined;
    const refusal = this.refusal(url, req, ch);
    if (refusal) {
      this.log('fleet_refused', { remote: req.socket.remoteAddress, why: refusal.why });
      return refuseUpgrade(socket, refusal);
    }
    this.wss.handleUpgrade(req, socket, head, (ws) =>
      ch
        ? this.attachDrill(ws, ch, req.socket.remoteAddress)
        : this.overview.attach(ws, socket, this.snapshot()),
    );
  }

  private attachDrill(ws: WebSocket, ch: FleetChannel, remote: string | undefined): void {
    const d = new ChannelViewer(
      ws,
      ch,
      this.o.sendCommand,
      `page viewer at ${remote ?? 'an unknown address'}`,
    );
    this.drills.add(d);
    ws.on('close', () => {
      this.drills.delete(d);
      d.detach();
    });
  }
}
