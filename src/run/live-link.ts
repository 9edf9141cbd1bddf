/**
 * The run's side of the live feed: turns samples, events and the result into hub messages, and
 * the hub's control requests into the run's own stop, cutoff and mark.
 */
import { LiveHub } from '../live/live-hub.js';
import { startLiveServer, type LiveServer } from '../live/live-server.js';
import type { LiveRunInfo, LiveSample } from '../live/live-types.js';
import type { SampleRow } from '../sinks/sample-row.js';
import { loadTokens } from '../live/tokens.js';
import { attentionOf, type EventRecord, type LiveFeedEvent } from '../record/events.js';
import { SEGMENT_STATE } from '../program/sequence-types.js';
import type { RunObserver } from './observer.js';

export interface LiveLinkOptions {
  listen: string;
  info: LiveRunInfo;
  /** The rig channel of the run: every message of the feed carries it (as text). */
  channel: number;
  stop(by: string): void;
  /** Whole-string volts; the run refuses anything below the floor. */
  setCutoff(volts: number, by: string): { ok: true } | { ok: false; error: string };
  /** A note for the event log; refused when too long or too frequent. */
  mark(note: string, by: string): { ok: true } | { ok: false; error: string };
  log(e: LiveFeedEvent): void;
  print(line: string): void;
}

/** An alarm in words, for viewers; null for an event that is not one. */
export function alarmText(rec: EventRecord): string | null {
  if (attentionOf(rec.event) !== 'alarm') return null;
  switch (rec.event) {
    case 'clock_warning':
      return `the rig's clock is off by ${(rec.rig_clock_error_ppm / 1e4).toFixed(1)} %; frames are timed by the host`;
    case 'link_down':
      return "the rig's port went away; waiting for it to return";
    case 'load_off_unconfirmed':
      return 'the rig did not confirm the load off; its watchdog cuts it within 5 s';
    case 'calibration_rejected':
      return `an edited calibration was rejected; ${rec.kept_id} stays in force`;
    case 'chemistry_rejected':
      return 'an edited chemistry file was rejected; the limits in force stay';
    case 'rig_error':
      return `the rig reports ${rec.code}: ${rec.text}`;
    case 'unlogged_discharge':
      return `about ${rec.estimated_s.toFixed(1)} s of discharge went unlogged (the daemon down or the port away); estimated at the last current and counted as doubt`;
    case 'implausible_reading':
      return `a reading that cannot be true was left out: ${rec.why}`;
    case 'open_load':
      return 'the load is on but no current flows: check the fuse, the load resistor and the sense wiring';
    default:
      return rec.event;
  }
}

/** A logged sample as the live feed shows it (an open or shorted thermistor has no temperature). */
export function toLiveSample(row: SampleRow, loadOn: boolean): LiveSample {
  return {
    host_s: row.hostS,
    voltage_V: row.volts,
    current_A: row.amps,
    temperature_C: Number.isFinite(row.celsius) ? row.celsius : null,
    charge_Ah: row.chargeAh,
    energy_Wh: row.energyWh,
    state: row.state,
    load_on: loadOn,
  };
}

export interface LiveLink {
  server: LiveServer;
  /** The run's hub: what the fleet link publishes. */
  hub: LiveHub;
  observer: RunObserver;
}

export async function startLiveLink(o: LiveLinkOptions): Promise<LiveLink> {
  const tokens = loadTokens();
  const hub = new LiveHub({ channel: String(o.channel) });
  hub.setRun(o.info);
  // A request relayed from elsewhere (the broker) says who asked; the page's own say nothing.
  hub.onControl((c, by = 'live control') => {
    switch (c.type) {
      case 'stop':
        o.stop(by);
        return { ok: true };
      case 'set-cutoff':
        return o.setCutoff(c.cutoff_V, by);
      case 'mark':
        return o.mark(c.note, by);
    }
  });
  const server = await startLiveServer({
    hub,
    listen: o.listen,
    tokenStore: tokens.tokens,
    log: (e) => o.log(e),
  });
  o.print(`live: ${server.url}`);
  for (const url of server.lanUrls)
    if (url !== server.url) o.print(`live (other machines, viewer token needed): ${url}`);
  if (tokens.generated) {
    o.print(
      `Live-feed tokens were made and saved in ${tokens.path} (owner-only); they are shown this once:`,
    );
    o.print(`  control token (stop, set-cutoff, mark): ${tokens.tokens.control}`);
    o.print(`  viewer token (watching from another machine): ${tokens.tokens.viewer}`);
  }
  return { server, hub, observer: liveObserver(hub) };
}

/** What a run tells a hub: its samples (the newest of each turn), alarms, cutoff and result. */
export function liveObserver(hub: LiveHub): RunObserver {
  // The hub takes the newest sample of each event-loop turn: a rig's frames arrive one per turn
  // and all reach it, while a burst read from the port in one chunk is not turned into a
  // hundred live samples that no viewer would be sent. Events and the result pass the pending
  // sample on first, so the feed keeps the log's order.
  let pendingRow: SampleRow | null = null;
  let pendingLoadOn = false;
  let lastState = 'waiting';
  let queued: NodeJS.Immediate | null = null;
  const passSample = (): void => {
    if (queued) clearImmediate(queued);
    queued = null;
    if (pendingRow === null) return;
    const row = pendingRow;
    pendingRow = null;
    hub.sample(toLiveSample(row, pendingLoadOn));
  };
  const event = (rec: EventRecord): void => {
    passSample();
    if (rec.event === 'state') {
      lastState = rec.to;
      hub.state({ host_s: rec.host_s, from: rec.from, to: rec.to, why: rec.why });
    } else if (rec.event === 'segment_started') {
      // A program's step: a state change for the page and watch, the segment named in its why.
      const to = (SEGMENT_STATE as Record<string, string>)[rec.kind] ?? rec.kind;
      const cycle = rec.cycle === null ? '' : `, cycle ${rec.cycle}`;
      const why = `segment ${rec.index}: ${rec.kind}, ${rec.step}${cycle}`;
      hub.state({ host_s: rec.host_s, from: lastState, to, why });
      lastState = to;
    } else if (rec.event === 'cutoff_changed') {
      hub.cutoffChanged(rec.cutoff_V, rec.by);
    } else if (rec.event === 'chemistry_changed') {
      hub.updateRun({
        cutoff_V: rec.cutoff_V,
        floor_V: rec.floor_V,
        max_temperature_C: rec.max_temperature_C,
      });
    } else if (rec.event === 'calibration_changed') {
      hub.updateRun({ calibration_id: rec.new_id });
    } else {
      const text = alarmText(rec);
      if (text !== null) hub.alarm({ host_s: rec.host_s, kind: rec.event, detail: text });
    }
  };
  return {
    sample: (row, loadOn) => {
      pendingRow = row;
      pendingLoadOn = loadOn;
      queued ??= setImmediate(passSample);
    },
    event,
    limitTripped: (hostS, reason, why) => hub.alarm({ host_s: hostS, kind: reason, detail: why }),
    ended: (result) => {
      passSample();
      hub.result(result as unknown as Record<string, unknown>);
    },
  };
}
