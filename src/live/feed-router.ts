import type { LiveHub } from './live-hub.js';
import type {
  BroadcastMessage,
  ControlReply,
  ServerMessage,
  StationControlRequest,
} from './live-types.js';
import type { StationFeed } from './station-feed.js';

/** What a viewer follows: one channel's hub, or a station's overview. */
export type ViewerFeed = { hub: LiveHub } | { station: StationFeed };

/**
 * Which feed a request reaches, which broadcasts a viewer gets and where its control requests
 * go: a one-run server has one hub; a station has a hub per channel and an overview.
 */
export class FeedRouter {
  /** The station, or null for a one-run server. */
  readonly station: StationFeed | null;
  private readonly hub: LiveHub | null;

  constructor(o: { hub?: LiveHub | undefined; station?: StationFeed | undefined }) {
    if ((o.hub === undefined) === (o.station === undefined))
      throw new Error('the live server follows one run (hub) or one station, not both or neither');
    this.station = o.station ?? null;
    this.hub = o.hub ?? null;
  }

  /** A station's address opens its overview; `?channel=<rig>/<n>` opens that channel's page. */
  pagePath(url: URL): string {
    const overview = this.station && url.pathname === '/' && !url.searchParams.has('channel');
    return overview ? '/station' : url.pathname;
  }

  /** What a request asks to follow; null when it names a channel the station does not have. */
  feedFor(url: URL): ViewerFeed | null {
    if (!this.station) return { hub: this.hub! };
    if (url.searchParams.get('view') === 'station') return { station: this.station };
    // Without a channel, a viewer made for one run follows the station's first channel.
    const key = url.searchParams.get('channel') ?? this.station.keys()[0];
    const hub = key !== undefined ? this.station.hub(key) : undefined;
    return hub ? { hub } : null;
  }

  /** The first message of a feed: the channel's hello, or the station's overview. */
  static greeting(feed: ViewerFeed): ServerMessage {
    return 'hub' in feed ? feed.hub.hello() : feed.station.overview();
  }

  /**
   * A channel's viewer gets its channel's messages; an overview viewer gets every channel's
   * events as they happen, its samples through the periodic overview instead.
   */
  wants(feed: ViewerFeed, m: BroadcastMessage): boolean {
    return 'hub' in feed
      ? this.station === null || m.channel === feed.hub.channel
      : m.type !== 'sample' && m.type !== 'hello';
  }

  subscribe(deliver: (m: BroadcastMessage) => void): () => void {
    return this.station ? this.station.subscribe(deliver) : this.hub!.subscribe(deliver);
  }

  /** A station routes a request by the channel it names, else the one the viewer follows. */
  control(
    feed: ViewerFeed,
    request: StationControlRequest,
    channel: string | undefined,
  ): ControlReply {
    if (!this.station) {
      if (request.type === 'start')
        return { ok: false, error: 'start is for the channels of a station; this run has one' };
      return this.hub!.control(request);
    }
    const key = channel ?? ('hub' in feed ? feed.hub.channel : undefined);
    if (key === undefined)
      return { ok: false, error: 'say which channel the request is for ("channel")' };
    return this.station.control(key, request);
  }
}
