import { hostname } from 'node:os';
import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock } from '../core/host-clock.js';
import { packageVersion } from '../core/paths.js';
import type { LiveHub } from '../live/live-hub.js';
import type { ControlReply, StationControlRequest } from '../live/live-types.js';
import { loadTokens } from '../live/tokens.js';
import { openBroker, type BrokerConnection } from './broker-connection.js';
import type { BrokerConfig } from './broker-options.js';
import { ChannelFeed, type FeedOutput } from './channel-feed.js';
import { takeCommand } from './command-intake.js';
import { Outbox, type Outgoing } from './outbox.js';
import { FLEET_VERSION, type StationStatus } from './payloads.js';
import {
  channelTopic,
  commandSubscription,
  parseTopic,
  SENDER_PROPERTY,
  stationTopic,
} from './topics.js';

export interface FleetLinkChannel {
  channel: number;
  hub: LiveHub;
  /**
   * Where the channel's requests go instead of its hub: a station's, which takes a start as
   * well (stop, cutoff and mark still pass the hub's checks there). Without it a start is refused.
   */
  control?: (c: StationControlRequest, by: string) => ControlReply;
}

export interface FleetLinkOptions {
  broker: BrokerConfig;
  station: string;
  channels: FleetLinkChannel[];
  /** The live feed's control token: broker commands need the same one. */
  controlToken: string | null;
  /** Samples per second and channel sent to the broker (the newest of each interval). @default 2 */
  sampleHz?: number;
  /** A channel's retained status is refreshed at least this often while samples come, ms. @default 10000 */
  statusEveryMs?: number;
  /** Bytes waiting on the broker socket past which samples are dropped, not written. @default 1048576 */
  maxBufferedBytes?: number;
  /** Into the run's event log: connections, losses, commands (at most 30 a minute). */
  log?(name: string, detail: Record<string, unknown>): void;
  clock?: Clock;
  backoffMinMs?: number;
  backoffMaxMs?: number;
}

export interface FleetLinkStats {
  connected: boolean;
  drops: number;
  samplesSent: number;
  samplesDropped: number;
  commandsTaken: number;
  commandsRefused: number;
  waiting: { statuses: number; events: number; results: number };
  eventsDropped: number;
}

export interface FleetLink {
  stats(): FleetLinkStats;
  /** Marks the station offline on the broker (sending what waits, up to timeoutMs) and disconnects. */
  close(timeoutMs?: number): Promise<void>;
}

interface ChannelSlot {
  feed: ChannelFeed;
  hub: LiveHub;
  control: FleetLinkChannel['control'];
  pending: FeedOutput | null;
  lastSentMs: number;
  /** When the channel's status was last queued (host clock, ms). */
  lastStatusMs: number;
  timer: TimerHandle | null;
  /** The status owed to samples sent since the last one, due statusEveryMs after it. */
  statusTimer: TimerHandle | null;
  unsubscribe: () => void;
}

function controlOf(slot: ChannelSlot, c: StationControlRequest, by: string): ControlReply {
  if (slot.control) return slot.control(c, by);
  if (c.type === 'start')
    return { ok: false, error: 'start is for the channels of a station; this run has one' };
  return slot.hub.control(c, by);
}

/** The sender a command names (self-declared, so only printable text, and not much of it). */
function senderOf(props: Record<string, string | string[]> | undefined): string {
  const v = props?.[SENDER_PROPERTY];
  const text = (Array.isArray(v) ? v[0] : v)?.replace(/[^\x20-\x7e]/g, '?').slice(0, 160);
  return text ? `"${text}"` : 'a client that did not name itself';
}

function throttledLog(
  log: FleetLinkOptions['log'],
  clock: Clock,
): NonNullable<FleetLinkOptions['log']> {
  let windowStart = clock.now();
  let count = 0;
  return (name, detail) => {
    if (!log) return;
    if (clock.now() - windowStart >= 60_000) {
      windowStart = clock.now();
      count = 0;
    }
    if (count++ < 30) log(name, detail);
  };
}

/**
 * A station's link to the broker: everything its live hubs broadcast goes out under the
 * station's topics, and commands from the broker go into the hubs' control path. The run never
 * waits for the broker and never sees it fail: the hub calls in synchronously, the link sends
 * when it can and holds back within the outbox's bounds when it cannot.
 */
export function startFleetLink(o: FleetLinkOptions): FleetLink {
  const link = new StationLink(o);
  return { stats: () => link.stats(), close: (timeoutMs) => link.close(timeoutMs) };
}

class StationLink {
  private readonly clock: Clock;
  private readonly log: NonNullable<FleetLinkOptions['log']>;
  private readonly gapMs: number;
  private readonly statusEveryMs: number;
  private readonly maxBuffered: number;
  private readonly outbox = new Outbox();
  private readonly slots = new Map<number, ChannelSlot>();
  private readonly counts = {
    samplesSent: 0,
    samplesDropped: 0,
    commandsTaken: 0,
    commandsRefused: 0,
  };
  private readonly conn: BrokerConnection;
  private closing = false;

  constructor(private readonly o: FleetLinkOptions) {
    this.clock = o.clock ?? new HostClock();
    this.log = throttledLog(o.log, this.clock);
    this.gapMs = 1000 / (o.sampleHz ?? 2);
    this.statusEveryMs = o.statusEveryMs ?? 10_000;
    this.maxBuffered = o.maxBufferedBytes ?? 1024 * 1024;
    this.conn = this.open();
    for (const c of o.channels) this.follow(c);
    this.conn.client.on('message', (topic, payload, packet) =>
      this.onCommand(topic, payload, senderOf(packet.properties?.userProperties)),
    );
  }

  stats(): FleetLinkStats {
    return {
      connected: this.conn.connected,
      drops: this.conn.drops,
      ...this.counts,
      waiting: this.outbox.waiting,
      eventsDropped: this.outbox.eventsDropped,
    };
  }

  async close(timeoutMs = 2000): Promise<void> {
    if (this.closing) return;
    for (const s of this.slots.values()) if (s.pending) this.sendSample(s);
    this.closing = true;
    for (const s of this.slots.values()) {
      s.unsubscribe();
      if (s.timer) this.clock.clearTimer(s.timer);
      this.queueStatus(s);
    }
    this.queueStationStatus(false, 'stopped');
    this.pump();
    await this.conn.close(timeoutMs);
  }

  private stationStatus(online: boolean, reason?: string): StationStatus {
    return {
      v: FLEET_VERSION,
      station: this.o.station,
      online,
      wall: new Date(this.clock.wallNow()).toISOString(),
      ...(reason !== undefined ? { reason } : {}),
      host: hostname(),
      version: packageVersion(),
      channels: [...this.slots.keys()],
      commands_refused: this.counts.commandsRefused,
    };
  }

  private queueStationStatus(online: boolean, reason?: string): void {
    const status = JSON.stringify(this.stationStatus(online, reason));
    this.outbox.status(stationTopic(this.o.station), status);
  }

  /** The broker connection, whose will marks the station offline when the link is lost. */
  private open(): BrokerConnection {
    const o = this.o;
    return openBroker({
      config: o.broker,
      will: {
        topic: stationTopic(o.station),
        payload: Buffer.from(JSON.stringify(this.stationStatus(false, 'connection lost'))),
        qos: 1,
        retain: true,
      },
      onConnect: () => {
        this.log('fleet_connected', { broker: o.broker.url, station: o.station });
        this.conn.client.subscribe(commandSubscription(o.station), { qos: 1 });
        this.queueStationStatus(true);
        for (const s of this.slots.values()) this.queueStatus(s);
        this.outbox.resendResults();
        this.pump();
      },
      onDown: (why) => {
        if (!this.closing) this.log('fleet_down', { broker: o.broker.url, why });
      },
      ...(o.backoffMinMs !== undefined ? { backoffMinMs: o.backoffMinMs } : {}),
      ...(o.backoffMaxMs !== undefined ? { backoffMaxMs: o.backoffMaxMs } : {}),
    });
  }

  private follow(c: FleetLinkChannel): void {
    const slot: ChannelSlot = {
      feed: new ChannelFeed(this.o.station, c.channel),
      hub: c.hub,
      control: c.control,
      pending: null,
      lastSentMs: -Infinity,
      lastStatusMs: -Infinity,
      timer: null,
      statusTimer: null,
      unsubscribe: () => {},
    };
    slot.feed.snapshot(c.hub.hello(), this.clock.wallNow());
    slot.unsubscribe = c.hub.subscribe((m) => this.onHub(slot, m));
    this.slots.set(c.channel, slot);
  }

  private send(m: Outgoing): void {
    this.conn.client.publish(m.topic, m.payload, { qos: 1, retain: m.retain }, (err) => {
      if (!m.isResult) return;
      if (!err) this.outbox.acked(m.topic, m.payload);
      else this.log('fleet_result_not_taken', { topic: m.topic, why: err.message });
    });
  }

  private pump(): void {
    if (this.conn.connected) this.outbox.take().forEach((m) => this.send(m));
  }

  private queueStatus(s: ChannelSlot): void {
    if (s.statusTimer) this.clock.clearTimer(s.statusTimer);
    s.statusTimer = null;
    s.lastStatusMs = this.clock.now();
    const status = s.feed.status(this.clock.wallNow());
    this.outbox.status(
      channelTopic(this.o.station, s.feed.channel, 'status'),
      JSON.stringify(status),
    );
  }

  private sendSample(s: ChannelSlot): void {
    if (s.timer) this.clock.clearTimer(s.timer);
    s.timer = null;
    const out = s.pending;
    s.pending = null;
    if (!out) return;
    s.lastSentMs = this.clock.now();
    const client = this.conn.client;
    const buffered =
      (client.stream as { writableLength?: number } | undefined)?.writableLength ?? 0;
    if (!this.conn.connected || buffered > this.maxBuffered) {
      this.counts.samplesDropped++;
      return;
    }
    const topic = channelTopic(this.o.station, s.feed.channel, 'sample');
    client.publish(topic, JSON.stringify(out.payload), { qos: 0 });
    this.counts.samplesSent++;
    // The status follows the samples every statusEveryMs, so a hub reading the retained status
    // sees values at most that old (state changes and alarms refresh it at once). Each channel
    // on its own samples' time, not all of a station's on one timer: a fleet of stations started
    // together would otherwise send every status in the same millisecond, and the samples behind
    // that burst at the fleet view would wait for all of it. A sample that comes sooner arms
    // the refresh for when it is due, so the last samples before a channel goes quiet reach the
    // retained status too (close() queues every status, which clears that timer).
    const due = s.lastStatusMs + this.statusEveryMs - this.clock.now();
    if (due <= 0) this.refreshStatus(s);
    else s.statusTimer ??= this.clock.setTimer(() => this.refreshStatus(s), due);
  }

  private refreshStatus(s: ChannelSlot): void {
    this.queueStatus(s);
    this.pump();
  }

  private onHub(s: ChannelSlot, m: Parameters<Parameters<LiveHub['subscribe']>[0]>[0]): void {
    if (this.closing) return;
    const out = s.feed.take(m, this.clock.wallNow());
    if (out?.kind === 'sample') {
      s.pending = out;
      const wait = s.lastSentMs + this.gapMs - this.clock.now();
      if (wait <= 0) this.sendSample(s);
      else s.timer ??= this.clock.setTimer(() => this.sendSample(s), wait);
      return;
    }
    // An event goes after the sample before it, as in the run's own log.
    if (s.pending) this.sendSample(s);
    if (out) {
      const topic = channelTopic(this.o.station, s.feed.channel, out.kind);
      if (out.kind === 'result') this.outbox.result(topic, JSON.stringify(out.payload));
      else this.outbox.event(topic, JSON.stringify(out.payload));
    }
    if (s.feed.dirty) this.queueStatus(s);
    this.pump();
  }

  private onCommand(topic: string, payload: Buffer, sender: string): void {
    const o = this.o;
    const t = parseTopic(topic);
    if (!t || t.kind !== 'command' || t.station !== o.station) return;
    const from = `fleet command through broker ${o.broker.url}, from ${sender}`;
    const reply = takeCommand(
      o.station,
      t.channel,
      payload,
      o.controlToken,
      (ch) => {
        const slot = this.slots.get(ch);
        return slot ? (c, by) => controlOf(slot, c, by) : null;
      },
      from,
    );
    if (reply.ok) this.counts.commandsTaken++;
    else {
      this.counts.commandsRefused++;
      this.queueStationStatus(true);
    }
    this.log('fleet_command', {
      channel: t.channel,
      request: reply.request,
      ok: reply.ok,
      ...(reply.ok ? {} : { code: reply.code, why: reply.error }),
    });
    const replyTopic = channelTopic(o.station, t.channel, 'reply');
    this.conn.client.publish(replyTopic, JSON.stringify(reply), { qos: 1 });
    this.pump();
  }
}

/** What `run --broker …` resolved, before anything was switched on. */
export interface FleetRunOptions {
  broker: BrokerConfig;
  station: string;
  /** @default 2 */
  sampleHz?: number;
}

/** The `fleet` field `run` adds to its request when a broker is given. */
export interface FleetRunRequest {
  fleet?: FleetRunOptions;
}

/**
 * A one-channel daemon's link: the live hub of its run, the live feed's own control token (so
 * the broker's commands need exactly what the live page's do), the run's event log.
 */
export function linkStation(
  fleet: FleetRunOptions,
  hub: LiveHub,
  channel: number,
  log: (name: string, detail: Record<string, unknown>) => void,
): FleetLink {
  return startFleetLink({
    ...fleet,
    channels: [{ channel, hub }],
    controlToken: loadTokens().tokens.control,
    log,
  });
}
