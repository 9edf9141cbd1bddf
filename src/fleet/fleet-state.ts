import { LiveHub } from '../live/live-hub.js';
import { LIVE_VERSION } from '../live/live-types.js';
import {
  parsePayload,
  type ChannelStatus,
  type FleetResult,
  type FleetReply,
  type FleetSample,
  type StationStatus,
} from './payloads.js';
import { parseTopic } from './topics.js';

/** One channel as the fleet view knows it; the hub feeds its drill-down page. */
export interface FleetChannel {
  key: string;
  station: string;
  channel: number;
  hub: LiveHub;
  status: ChannelStatus | null;
  sample: FleetSample | null;
  runId: string | null;
  lastAlarm: string | null;
  endReason: string | null;
}

/** What a message changed, for the overview page. */
export type FleetChange =
  | { kind: 'channel'; channel: FleetChannel }
  | { kind: 'station'; station: StationStatus }
  | { kind: 'reply'; reply: FleetReply }
  | { kind: 'result'; channel: FleetChannel; result: FleetResult }
  | null;

export interface FleetStateOptions {
  /** Channels tracked at most; more are refused and counted. @default 2048 */
  maxChannels?: number;
  /** Stations tracked at most. @default 512 */
  maxStations?: number;
}

export function channelKey(station: string, channel: number): string {
  return `${station}/${channel}`;
}

/**
 * Everything the fleet view has heard from the broker, validated. Each channel gets its own
 * live hub, fed as a daemon would feed it, so the drill-down page speaks the live feed's own
 * protocol. Bounded: a broker full of junk topics cannot grow it past its limits.
 */
export class FleetState {
  readonly stations = new Map<string, StationStatus>();
  readonly channels = new Map<string, FleetChannel>();
  /** Messages refused: not JSON, not valid, or beyond the bounds. */
  refused = 0;
  private readonly maxChannels: number;
  private readonly maxStations: number;
  /** Results already reported, by station and run, oldest first (bounded). */
  private readonly seenResults = new Set<string>();

  constructor(o: FleetStateOptions = {}) {
    this.maxChannels = o.maxChannels ?? 2048;
    this.maxStations = o.maxStations ?? 512;
  }

  apply(topic: string, bytes: Buffer): FleetChange {
    const t = parseTopic(topic);
    if (!t || t.kind === 'command') return null;
    if (t.channel === null) {
      const p = parsePayload('station', bytes);
      if (!p.ok || p.value.station !== t.station) return this.refuse();
      if (!this.stations.has(t.station) && this.stations.size >= this.maxStations)
        return this.refuse();
      this.stations.set(t.station, p.value);
      return { kind: 'station', station: p.value };
    }
    const p = parsePayload(t.kind, bytes);
    if (!p.ok || p.value.station !== t.station || p.value.channel !== t.channel)
      return this.refuse();
    if (t.kind === 'reply') return { kind: 'reply', reply: p.value as FleetReply };
    const ch = this.channel(t.station, t.channel);
    if (!ch) return this.refuse();
    return this.applyChannel(ch, p.value as Exclude<typeof p.value, FleetReply>);
  }

  private applyChannel(
    ch: FleetChannel,
    m:
      | ChannelStatus
      | FleetSample
      | Exclude<
          ReturnType<typeof parsePayload<'state' | 'alarm' | 'mark' | 'result'>>,
          { ok: false }
        >['value'],
  ): FleetChange {
    if ('made_ms' in m) {
      ch.sample = m;
      const { v: _v, station: _s, channel: _c, made_ms: _m, time_to_cutoff_s: _t, ...s } = m;
      ch.hub.sample(s);
      return { kind: 'channel', channel: ch };
    }
    if ('last_alarm' in m) {
      this.takeStatus(ch, m);
      return { kind: 'channel', channel: ch };
    }
    if ('result' in m) {
      const reason = m.result['end_reason'];
      if (m.run_id === ch.runId && !ch.hub.status().ended) {
        ch.hub.result(m.result);
        ch.endReason = typeof reason === 'string' ? reason : 'ended';
      }
      const id = `${m.station}/${m.run_id}`;
      if (this.seenResults.has(id)) return { kind: 'channel', channel: ch };
      this.seenResults.add(id);
      if (this.seenResults.size > 4 * this.maxChannels)
        this.seenResults.delete(this.seenResults.values().next().value as string);
      return { kind: 'result', channel: ch, result: m };
    }
    if ('from' in m) ch.hub.state({ host_s: m.host_s, from: m.from, to: m.to, why: m.why });
    else if ('kind' in m) {
      ch.hub.alarm({ host_s: m.host_s, kind: m.kind, detail: m.detail });
      ch.lastAlarm = `${m.kind}: ${m.detail}`;
    } else ch.hub.control({ type: 'mark', note: m.note });
    return { kind: 'channel', channel: ch };
  }

  /** A retained status: a new run resets the channel's hub; a later cutoff is passed on. */
  private takeStatus(ch: FleetChannel, s: ChannelStatus): void {
    ch.status = s;
    if (s.last_alarm) ch.lastAlarm = `${s.last_alarm.kind}: ${s.last_alarm.detail}`;
    if (s.run && s.run.run_id !== ch.runId) {
      const { run_id, ...info } = s.run;
      ch.runId = run_id;
      ch.endReason = null;
      ch.lastAlarm = s.last_alarm ? `${s.last_alarm.kind}: ${s.last_alarm.detail}` : null;
      ch.hub.setRun(info);
    }
    // The status carries the latest values: a view that missed the samples catches up from it.
    const latest = ch.hub.status().sample;
    if (s.voltage_V !== null && s.host_s !== null && (!latest || latest.host_s < s.host_s))
      ch.hub.sample({
        host_s: s.host_s,
        voltage_V: s.voltage_V,
        current_A: s.current_A ?? 0,
        temperature_C: s.temperature_C,
        charge_Ah: s.charge_Ah ?? 0,
        energy_Wh: s.energy_Wh ?? 0,
        state: s.state,
        load_on: s.load_on ?? false,
      });
    if (s.cutoff_V !== null && s.cutoff_V !== ch.hub.status().cutoff_V)
      ch.hub.cutoffChanged(s.cutoff_V);
  }

  private channel(station: string, channel: number): FleetChannel | null {
    const key = channelKey(station, channel);
    let ch = this.channels.get(key);
    if (ch) return ch;
    if (this.channels.size >= this.maxChannels) return null;
    const hub = new LiveHub({ historyPoints: 1000 });
    // The station has applied each mark already; this handler only lets the hub show it.
    hub.onControl((c) => (c.type === 'mark' ? { ok: true } : { ok: false, error: 'not here' }));
    ch = {
      key,
      station,
      channel,
      hub,
      status: null,
      sample: null,
      runId: null,
      lastAlarm: null,
      endReason: null,
    };
    this.channels.set(key, ch);
    return ch;
  }

  private refuse(): null {
    this.refused++;
    return null;
  }
}

/** A channel's tile on the overview page. */
export interface Tile {
  type: 'tile';
  v: typeof LIVE_VERSION;
  key: string;
  station: string;
  channel: number;
  label: string | null;
  chemistry: string | null;
  cells: number | null;
  state: string;
  ended: boolean;
  voltage_V: number | null;
  current_A: number | null;
  temperature_C: number | null;
  charge_Ah: number | null;
  time_to_cutoff_s: number | null;
  cutoff_V: number | null;
  alarm: string | null;
  end_reason: string | null;
  /** When the station had the sample shown, Unix ms (the station's clock). */
  made_ms: number | null;
}

/** Cheap enough for every sample: the hub's status, not its history. */
export function tileOf(ch: FleetChannel): Tile {
  const st = ch.hub.status();
  const s = st.sample;
  const run = ch.status?.run ?? null;
  return {
    type: 'tile',
    v: LIVE_VERSION,
    key: ch.key,
    station: ch.station,
    channel: ch.channel,
    label: run?.label ?? null,
    chemistry: run?.chemistry ?? null,
    cells: run?.cells ?? null,
    state: st.state,
    ended: st.ended || (ch.status?.ended ?? false),
    voltage_V: s?.voltage_V ?? null,
    current_A: s?.current_A ?? null,
    temperature_C: s?.temperature_C ?? null,
    charge_Ah: s?.charge_Ah ?? null,
    time_to_cutoff_s: st.time_to_cutoff_s,
    cutoff_V: st.cutoff_V,
    alarm: ch.lastAlarm,
    end_reason: ch.endReason,
    made_ms: ch.sample?.made_ms ?? null,
  };
}
