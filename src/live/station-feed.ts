import { LiveHub, type LiveHubOptions } from './live-hub.js';
import {
  LIVE_VERSION,
  type BroadcastMessage,
  type ControlReply,
  type StationChannel,
  type StationControlRequest,
  type StationMessage,
} from './live-types.js';

/** A station's handler of viewers' requests, per channel (a start included). */
export type StationControlHandler = (
  channel: string,
  c: StationControlRequest,
  by?: string,
) => ControlReply;

interface Entry {
  rig: string;
  ch: number;
  hub: LiveHub;
  cellId: string | null;
}

/**
 * The live feed of a station: one hub per channel, in the order of rigs and channels, and the
 * overview of them all. No sockets and no timers; a channel keeps its hub across runs (a new
 * run on it is the hub's `setRun`), so the number of hubs is fixed by the station file.
 */
export class StationFeed {
  private readonly entries = new Map<string, Entry>();
  private readonly listeners = new Set<(m: BroadcastMessage) => void>();
  private handler: StationControlHandler | null = null;

  constructor(private readonly hubOptions: Omit<LiveHubOptions, 'channel'> = {}) {}

  /** Adds a channel (in display order); its hub's messages carry `channel`. */
  add(rig: string, ch: number, cellId: string | null = null): LiveHub {
    const key = `${rig}/${ch}`;
    if (this.entries.has(key)) throw new Error(`channel ${key} added twice`);
    const hub = new LiveHub({ ...this.hubOptions, channel: key });
    hub.subscribe((m) => {
      for (const l of this.listeners) l(m);
    });
    // A viewer's run controls reach the station's handler, after the hub's own checks (the floor).
    hub.onControl((c, by) => this.route(key, c, by));
    this.entries.set(key, { rig, ch, hub, cellId });
    return hub;
  }

  /** The channel keys, in display order. */
  keys(): string[] {
    return [...this.entries.keys()];
  }

  hub(key: string): LiveHub | undefined {
    return this.entries.get(key)?.hub;
  }

  /** The cell now on a channel, shown on its tile. */
  setCellId(key: string, cellId: string | null): void {
    const e = this.entries.get(key);
    if (e) e.cellId = cellId;
  }

  onControl(handler: StationControlHandler): void {
    this.handler = handler;
  }

  /**
   * A viewer's request for one channel, its control token already checked. Stop, cutoff and
   * mark go through the channel's hub, which refuses a cutoff below the floor before asking;
   * a start goes straight to the station, which refuses it while a run is going.
   */
  control(key: string, c: StationControlRequest, by?: string): ControlReply {
    const e = this.entries.get(key);
    if (!e) return { ok: false, error: `there is no channel ${key} in this station` };
    if (c.type === 'start') return this.route(key, c, by);
    return e.hub.control(c, by);
  }

  /** Every channel's broadcast messages, each carrying its channel. */
  subscribe(listener: (m: BroadcastMessage) => void): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  /** The overview: one entry per channel, in rig and channel order. */
  overview(): StationMessage {
    const channels: StationChannel[] = [];
    for (const [key, e] of this.entries)
      channels.push({
        channel: key,
        rig: e.rig,
        ch: e.ch,
        cell_id: e.cellId,
        run: e.hub.runInfo(),
        status: e.hub.status(),
        alarm: e.hub.lastAlarm(),
        result: e.hub.resultOf(),
      });
    return { type: 'station', v: LIVE_VERSION, channels };
  }

  private route(key: string, c: StationControlRequest, by?: string): ControlReply {
    if (!this.handler) return { ok: false, error: 'the daemon takes no control requests' };
    return this.handler(key, c, by);
  }
}
