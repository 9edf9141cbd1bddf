/**
 * The live feed's data: what the daemon hands the hub, and the messages the hub sends to
 * viewers. The message shapes are a contract (docs/live-feed.md); the schemas in
 * message-schemas.ts describe the same shapes for validation.
 */

/** Version of every live-feed message; a viewer refuses a message with another version. */
export const LIVE_VERSION = 1;

export interface LiveRunInfo {
  label: string;
  run_folder: string;
  chemistry: string;
  cells: number;
  /** Whole string, volts. */
  cutoff_V: number;
  /** Lowest cutoff anyone may set for the whole string, volts. */
  floor_V: number;
  calibration_id: string;
  started_wall: string;
  source: string;
  max_temperature_C: number;
}

export interface LiveSample {
  /** Seconds since the run started, on the daemon's monotonic clock. */
  host_s: number;
  voltage_V: number;
  current_A: number;
  temperature_C: number | null;
  charge_Ah: number;
  energy_Wh: number;
  state: string;
  load_on: boolean;
}

export interface LiveStateChange {
  host_s: number;
  from: string;
  to: string;
  why: string;
}

export interface LiveAlarm {
  host_s: number;
  kind: string;
  detail: string;
}

export interface LiveMark {
  host_s: number;
  note: string;
}

export type ControlRequest =
  | { type: 'stop' }
  /** `confirm`: the sender knows the cutoff is at or above the present voltage (it ends the run now). */
  | { type: 'set-cutoff'; cutoff_V: number; confirm?: boolean }
  | { type: 'mark'; note: string };
/** Starts the next run on a station's channel (after a cell swap), optionally naming the cell. */
export interface StartRequest {
  type: 'start';
  cell_id?: string;
}
/** What a station's channel takes from a viewer: a run's controls, and a start. */
export type StationControlRequest = ControlRequest | StartRequest;
export type ControlReply = { ok: true } | { ok: false; error: string };
/** `by` names who asked, for the event log; the live page's own viewers leave it out. */
export type ControlHandler = (c: ControlRequest, by?: string) => ControlReply;

/** Columns of a history point, in order. */
export const HISTORY_FIELDS = [
  'host_s',
  'voltage_V',
  'current_A',
  'temperature_C',
  'charge_Ah',
  'energy_Wh',
] as const;
export type HistoryPoint = [number, number, number, number | null, number, number];

export interface FeedStatus {
  /** The latest sample, or null before the first one. */
  sample: LiveSample | null;
  state: string;
  cutoff_V: number | null;
  /** Seconds until the voltage reaches the cutoff at the recent slope; null when unknown. */
  time_to_cutoff_s: number | null;
  /** The recent voltage slope the estimate uses, volts per second. */
  slope_V_per_s: number | null;
  ended: boolean;
}

/**
 * The channel a message is about: `<rig>/<n>` in a station, the channel number alone in a
 * one-channel run. Absent only from a daemon older than the field.
 */
export interface ChannelTag {
  channel?: string;
}

export interface HelloMessage extends ChannelTag {
  type: 'hello';
  v: typeof LIVE_VERSION;
  run: LiveRunInfo | null;
  status: FeedStatus;
  history: { fields: typeof HISTORY_FIELDS; stride: number; points: HistoryPoint[] };
  alarms: LiveAlarm[];
  events: Array<({ kind: 'state' } & LiveStateChange) | ({ kind: 'mark' } & LiveMark)>;
  result: Record<string, unknown> | null;
}

export interface SampleMessage extends LiveSample, ChannelTag {
  type: 'sample';
  v: typeof LIVE_VERSION;
  time_to_cutoff_s: number | null;
}

export interface StateMessage extends LiveStateChange, ChannelTag {
  type: 'state';
  v: typeof LIVE_VERSION;
}

export interface AlarmMessage extends LiveAlarm, ChannelTag {
  type: 'alarm';
  v: typeof LIVE_VERSION;
}

export interface MarkMessage extends LiveMark, ChannelTag {
  type: 'mark';
  v: typeof LIVE_VERSION;
}

export interface ResultMessage extends ChannelTag {
  type: 'result';
  v: typeof LIVE_VERSION;
  result: Record<string, unknown>;
}

export interface CutoffMessage extends ChannelTag {
  type: 'cutoff';
  v: typeof LIVE_VERSION;
  cutoff_V: number;
  /** Who changed it ("live control", "control 0 cutoff", …), when known. */
  by?: string;
  /** Run time of the change, s, when known. */
  host_s?: number;
}

export interface AckMessage extends ChannelTag {
  type: 'ack';
  v: typeof LIVE_VERSION;
  id: string | null;
  request: StationControlRequest['type'];
}

export interface ErrorMessage extends ChannelTag {
  type: 'error';
  v: typeof LIVE_VERSION;
  id: string | null;
  code: LiveErrorCode;
  error: string;
}

export type LiveErrorCode = 'malformed' | 'unauthorized' | 'refused';

/** One channel of a station as the overview shows it. */
export interface StationChannel {
  /** `<rig>/<n>`, the key every other message carries as `channel`. */
  channel: string;
  rig: string;
  ch: number;
  cell_id: string | null;
  /** The channel's run, or null for a channel waiting for a start. */
  run: LiveRunInfo | null;
  status: FeedStatus;
  /** The newest alarm of the run, or null. */
  alarm: LiveAlarm | null;
  result: Record<string, unknown> | null;
}

/** The whole station: sent to an overview viewer on connect and then a few times a second. */
export interface StationMessage {
  type: 'station';
  v: typeof LIVE_VERSION;
  channels: StationChannel[];
}

/** What the hub broadcasts to every viewer. */
export type BroadcastMessage =
  | HelloMessage
  | SampleMessage
  | StateMessage
  | AlarmMessage
  | MarkMessage
  | ResultMessage
  | CutoffMessage;
/** Everything a viewer can receive. */
export type ServerMessage = BroadcastMessage | StationMessage | AckMessage | ErrorMessage;

/** A control message as it arrives from a viewer, after validation. */
export type ClientMessage = StationControlRequest & {
  v: typeof LIVE_VERSION;
  token: string;
  id?: string;
  /** Which channel of a station the request is for; a channel's own page may leave it out. */
  channel?: string;
};
