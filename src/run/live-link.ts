/**
 * The run's side of the live feed: turns samples, events and the result into hub messages, and
 * the hub's control requests into the run's own stop, cutoff and mark.
 */
import { LiveHub } from '../live/live-hub.js';
import { startLiveServer, type LiveServer } from '../live/live-server.js';
import type { LiveRunInfo, LiveSample } from '../live/live-types.js';
import { SAFETY_END_REASONS } from '../session/session-types.js';
import type { SampleRow } from '../sinks/sample-row.js';
import { loadTokens } from '../live/tokens.js';
import type { EventRecord } from './event-log.js';
import type { RunObserver } from './daemon.js';

export interface LiveLinkOptions {
  listen: string;
  info: LiveRunInfo;
  /** The rig channel of the run: every message of the feed carries it (as text). */
  channel: number;
  stop(by: string): void;
  /** Whole-string volts; the run refuses anything below the floor. */
  setCutoff(volts: number, by: string): { ok: true } | { ok: false; error: string };
  mark(note: string, by: string): void;
  log(name: string, detail: Record<string, unknown>): void;
  print(line: string): void;
}

/** Events that deserve a viewer's attention, not just a line in the log, in words. */
const ALARM_TEXT: Record<string, (d: Record<string, unknown>) => string> = {
  clock_warning: (d) =>
    `the rig's clock is off by ${(Number(d['rig_clock_error_ppm']) / 1e4).toFixed(1)} %; frames are timed by the host`,
  link_down: () => "the rig's port went away; waiting for it to return",
  load_off_unconfirmed: () =>
    'the rig did not confirm the load off; its watchdog cuts it within 5 s',
  calibration_rejected: (d) =>
    `an edited calibration was rejected; ${String(d['kept_id'])} stays in force`,
  chemistry_rejected: () => 'an edited chemistry file was rejected; the limits in force stay',
  rig_error: (d) => `the rig reports ${String(d['code'])}: ${String(d['text'])}`,
  implausible_reading: (d) => `a reading that cannot be true was left out: ${String(d['why'])}`,
  open_load: () =>
    'the load is on but no current flows: check the fuse, the load resistor and the sense wiring',
  unlogged_discharge: (d) =>
    `about ${Number(d['estimated_s']).toFixed(1)} s of discharge went unlogged while the daemon was down`,
};
/** A run ending on these is an alarm; at the cutoff or by the user it is the normal end. */
const LIMIT_REASONS: readonly string[] = SAFETY_END_REASONS;

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
  observer: RunObserver;
}

export async function startLiveLink(o: LiveLinkOptions): Promise<LiveLink> {
  const tokens = loadTokens();
  const hub = new LiveHub({ channel: String(o.channel) });
  hub.setRun(o.info);
  hub.onControl((c) => {
    switch (c.type) {
      case 'stop':
        o.stop('live control');
        return { ok: true };
      case 'set-cutoff':
        return o.setCutoff(c.cutoff_V, 'live control');
      case 'mark':
        o.mark(c.note, 'live control');
        return { ok: true };
    }
  });
  const server = await startLiveServer({
    hub,
    listen: o.listen,
    tokenStore: tokens.tokens,
    log: (name, detail) => o.log(name, detail),
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
  return { server, observer: liveObserver(hub) };
}

/** What a run tells a hub: its samples (the newest of each turn), alarms, cutoff and result. */
export function liveObserver(hub: LiveHub): RunObserver {
  // The hub takes the newest sample of each event-loop turn: a rig's frames arrive one per turn
  // and all reach it, while a burst read from the port in one chunk is not turned into a
  // hundred live samples that no viewer would be sent. Events and the result pass the pending
  // sample on first, so the feed keeps the log's order.
  let pendingRow: SampleRow | null = null;
  let pendingLoadOn = false;
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
    const d = rec as Record<string, unknown>;
    if (rec.event === 'state') {
      const why = String(d['why'] ?? '');
      hub.state({ host_s: rec.host_s, from: String(d['from']), to: String(d['to']), why });
      const reason = why.split(':')[0] ?? '';
      if (d['to'] === 'stopping' && LIMIT_REASONS.includes(reason))
        hub.alarm({ host_s: rec.host_s, kind: reason, detail: why });
    } else if (rec.event === 'cutoff_changed') {
      hub.cutoffChanged(Number(d['cutoff_V']));
    } else {
      const text = ALARM_TEXT[rec.event];
      if (text) hub.alarm({ host_s: rec.host_s, kind: rec.event, detail: text(d) });
    }
  };
  return {
    sample: (row, loadOn) => {
      pendingRow = row;
      pendingLoadOn = loadOn;
      queued ??= setImmediate(passSample);
    },
    event,
    ended: (result) => {
      passSample();
      hub.result(result as unknown as Record<string, unknown>);
    },
  };
}
