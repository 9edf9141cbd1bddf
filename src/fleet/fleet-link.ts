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
  timer: TimerHandle | null;
  unsubscribe: () => void;
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

/**
 * A station's link to the broker: everything its live hubs broadcast goes out under the
 * station's topics, and commands from the broker go into the hubs' control path. The run never
 * waits for the broker and never sees it fail: the hub calls in synchronously, the link sends
 * when it can and holds back within the outbox's bounds when it cannot.
 */
export function startFleetLink(o: FleetLinkOptions): FleetLink {
  const clock = o.clock ?? new HostClock();
  const log = throttledLog(o.log, clock);
  const gapMs = 1000 / (o.sampleHz ?? 2);
  const maxBuffered = o.maxBufferedBytes ?? 1024 * 1024;
  const outbox = new Outbox();
  const slots = new Map<number, ChannelSlot>();
  const stats = { samplesSent: 0, samplesDropped: 0, commandsTaken: 0, commandsRefused: 0 };
  let closing = false;

  const stationStatus = (online: boolean, reason?: string): StationStatus => ({
    v: FLEET_VERSION,
    station: o.station,
    online,
    wall: new Date(clock.wallNow()).toISOString(),
    ...(reason !== undefined ? { reason } : {}),
    host: hostname(),
    version: packageVersion(),
    channels: [...slots.keys()],
    commands_refused: stats.commandsRefused,
  });

  const conn: BrokerConnection = openBroker({
    config: o.broker,
    will: {
      topic: stationTopic(o.station),
      payload: Buffer.from(JSON.stringify(stationStatus(false, 'connection lost'))),
      qos: 1,
      retain: true,
    },
    onConnect: () => {
      log('fleet_connected', { broker: o.broker.url, station: o.station });
      conn.client.subscribe(commandSubscription(o.station), { qos: 1 });
      outbox.status(stationTopic(o.station), JSON.stringify(stationStatus(true)));
      for (const s of slots.values()) queueStatus(s);
      outbox.resendResults();
      pump();
    },
    onDown: (why) => {
      if (!closing) log('fleet_down', { broker: o.broker.url, why });
    },
    ...(o.backoffMinMs !== undefined ? { backoffMinMs: o.backoffMinMs } : {}),
    ...(o.backoffMaxMs !== undefined ? { backoffMaxMs: o.backoffMaxMs } : {}),
  });

  function send(m: Outgoing): void {
    conn.client.publish(m.topic, m.payload, { qos: 1, retain: m.retain }, (err) => {
      if (!m.isResult) return;
      if (!err) outbox.acked(m.topic, m.payload);
      else log('fleet_result_not_taken', { topic: m.topic, why: err.message });
    });
  }

  function pump(): void {
    if (conn.connected) outbox.take().forEach(send);
  }

  function queueStatus(s: ChannelSlot): void {
    const status = s.feed.status(clock.wallNow());
    outbox.status(channelTopic(o.station, s.feed.channel, 'status'), JSON.stringify(status));
  }

  function sendSample(s: ChannelSlot): void {
    if (s.timer) clock.clearTimer(s.timer);
    s.timer = null;
    const out = s.pending;
    s.pending = null;
    if (!out) return;
    s.lastSentMs = clock.now();
    const buffered =
      (conn.client.stream as { writableLength?: number } | undefined)?.writableLength ?? 0;
    if (!conn.connected || buffered > maxBuffered) {
      stats.samplesDropped++;
      return;
    }
    conn.client.publish(
      channelTopic(o.station, s.feed.channel, 'sample'),
      JSON.stringify(out.payload),
      { qos: 0 },
    );
    stats.samplesSent++;
  }

  function onHub(s: ChannelSlot, m: Parameters<Parameters<LiveHub['subscribe']>[0]>[0]): void {
    if (closing) return;
    const out = s.feed.take(m, clock.wallNow());
    if (out?.kind === 'sample') {
      s.pending = out;
      const wait = s.lastSentMs + gapMs - clock.now();
      if (wait <= 0) sendSample(s);
      else s.timer ??= clock.setTimer(() => sendSample(s), wait);
      return;
    }
    // An event goes after the sample before it, as in the run's own log.
    if (s.pending) sendSample(s);
    if (out?.kind === 'result')
      outbox.result(channelTopic(o.station, s.feed.channel, 'result'), JSON.stringify(out.payload));
    else if (out)
      outbox.event(channelTopic(o.station, s.feed.channel, out.kind), JSON.stringify(out.payload));
    if (s.feed.dirty) queueStatus(s);
    pump();
  }

  for (const c of o.channels) {
    const slot: ChannelSlot = {
      feed: new ChannelFeed(o.station, c.channel),
      hub: c.hub,
      control: c.control,
      pending: null,
      lastSentMs: -Infinity,
      timer: null,
      unsubscribe: () => {},
    };
    slot.feed.snapshot(c.hub.hello(), clock.wallNow());
    slot.unsubscribe = c.hub.subscribe((m) => onHub(slot, m));
    slots.set(c.channel, slot);
  }

  conn.client.on('message', (topic, payload, packet) => {
    const t = parseTopic(topic);
    if (!t || t.kind !== 'command' || t.station !== o.station) return;
    const from = `fleet command through broker ${o.broker.url}, from ${senderOf(packet.properties?.userProperties)}`;
    const reply = takeCommand(
      o.station,
      t.channel,
      payload,
      o.controlToken,
      (ch) => {
        const slot = slots.get(ch);
        return slot ? (c, by) => controlOf(slot, c, by) : null;
      },
      from,
    );
    if (reply.ok) stats.commandsTaken++;
    else {
      stats.commandsRefused++;
      outbox.status(stationTopic(o.station), JSON.stringify(stationStatus(true)));
    }
    log('fleet_command', {
      channel: t.channel,
      request: reply.request,
      ok: reply.ok,
      ...(reply.ok ? {} : { code: reply.code, why: reply.error }),
    });
    conn.client.publish(channelTopic(o.station, t.channel, 'reply'), JSON.stringify(reply), {
      qos: 1,
    });
    pump();
  });

  // Statuses follow the samples every statusEveryMs, so a hub reading the retained status sees
  // values at most that old; state changes and alarms refresh it at once.
  const refresh = clock.setTimer(
    () => {
      for (const s of slots.values()) queueStatus(s);
      pump();
    },
    o.statusEveryMs ?? 10_000,
    true,
  );

  return {
    stats: () => ({
      connected: conn.connected,
      drops: conn.drops,
      ...stats,
      waiting: outbox.waiting,
      eventsDropped: outbox.eventsDropped,
    }),
    close: async (timeoutMs = 2000) => {
      if (closing) return;
      for (const s of slots.values()) if (s.pending) sendSample(s);
      closing = true;
      clock.clearTimer(refresh);
      for (const s of slots.values()) {
        s.unsubscribe();
        if (s.timer) clock.clearTimer(s.timer);
        queueStatus(s);
      }
      outbox.status(stationTopic(o.station), JSON.stringify(stationStatus(false, 'stopped')));
      pump();
      await conn.close(timeoutMs);
    },
  };
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
