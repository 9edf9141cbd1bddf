import { CutoffEstimator, type CutoffEstimateOptions } from './cutoff-estimate.js';
import { cutoffEndsRunNow } from '../session/limits.js';
import { DownsampledHistory } from './history.js';
import {
  HISTORY_FIELDS,
  LIVE_VERSION,
  type BroadcastMessage,
  type ControlHandler,
  type ControlReply,
  type ControlRequest,
  type HelloMessage,
  type HistoryPoint,
  type LiveAlarm,
  type LiveRunInfo,
  type LiveSample,
  type LiveStateChange,
  type FeedStatus,
} from './live-types.js';

export interface LiveHubOptions {
  /** Most points of the downsampled run history sent in `hello`. @default 2000 */
  historyPoints?: number;
  /** Most recent alarms kept for `hello`. @default 50 */
  alarmsKept?: number;
  /** Most recent state changes and marks kept for `hello`. @default 100 */
  eventsKept?: number;
  estimate?: CutoffEstimateOptions;
  /** The channel this hub's run is on, carried by every message as `channel` (see ChannelTag). */
  channel?: string;
}

type HubEvent = HelloMessage['events'][number];

/**
 * What the live feed knows about the run: the daemon feeds it, viewers read it. No sockets
 * and no timers here; every collection is bounded, so memory does not grow over a long run.
 */
export class LiveHub {
  private run: LiveRunInfo | null = null;
  private latest: LiveSample | null = null;
  private stateName = 'waiting';
  private cutoffV: number | null = null;
  private resultValue: Record<string, unknown> | null = null;
  private alarms: LiveAlarm[] = [];
  private events: HubEvent[] = [];
  private readonly history: DownsampledHistory;
  private readonly estimator: CutoffEstimator;
  private readonly listeners = new Set<(m: BroadcastMessage) => void>();
  private handler: ControlHandler | null = null;
  private readonly alarmsKept: number;
  private readonly eventsKept: number;
  readonly channel: string | undefined;

  constructor(o: LiveHubOptions = {}) {
    this.channel = o.channel;
    this.history = new DownsampledHistory(o.historyPoints ?? 2000);
    this.estimator = new CutoffEstimator(o.estimate);
    this.alarmsKept = o.alarmsKept ?? 50;
    this.eventsKept = o.eventsKept ?? 100;
  }

  /** Starts a (new) run: clears what the hub knew and sends every viewer a fresh `hello`. */
  setRun(info: LiveRunInfo): void {
    this.run = { ...info };
    this.latest = null;
    this.stateName = 'waiting';
    this.cutoffV = info.cutoff_V;
    this.resultValue = null;
    this.alarms = [];
    this.events = [];
    this.history.clear();
    this.estimator.reset();
    this.emit(this.hello());
  }

  /**
   * The run's details changed mid-run (an accepted calibration or chemistry reload): kept for
   * every later `hello`, the cutoff used for the time-to-cutoff, and a fresh `hello` sent to
   * the viewers connected, without clearing what the hub knew.
   */
  updateRun(changes: Partial<Omit<LiveRunInfo, 'label' | 'run_folder' | 'started_wall'>>): void {
    if (!this.run) return;
    this.run = { ...this.run, ...changes };
    if (changes.cutoff_V !== undefined) this.cutoffV = changes.cutoff_V;
    this.emit(this.hello());
  }

  /** Takes the sample as given (the caller hands over an object it no longer changes). */
  sample(input: LiveSample): void {
    // An open or shorted thermistor reads as no temperature rather than NaN, which JSON cannot carry.
    const t = input.temperature_C;
    const s = t === null || Number.isFinite(t) ? input : { ...input, temperature_C: null };
    this.latest = s;
    this.stateName = s.state;
    if (this.history.keepsNext()) this.history.add(toPoint(s));
    else this.history.skip();
    this.estimator.add(s.host_s, s.voltage_V, s.load_on);
    if (this.listeners.size === 0) return;
    this.emit({
      type: 'sample',
      v: LIVE_VERSION,
      host_s: s.host_s,
      voltage_V: s.voltage_V,
      current_A: s.current_A,
      temperature_C: s.temperature_C,
      charge_Ah: s.charge_Ah,
      energy_Wh: s.energy_Wh,
      state: s.state,
      load_on: s.load_on,
      time_to_cutoff_s: this.estimator.estimate(this.cutoffV).time_to_cutoff_s,
    });
  }

  state(s: LiveStateChange): void {
    this.stateName = s.to;
    this.pushEvent({ kind: 'state', ...s });
    this.emit({ type: 'state', v: LIVE_VERSION, ...s });
  }

  alarm(a: LiveAlarm): void {
    this.alarms.push({ ...a });
    if (this.alarms.length > this.alarmsKept) this.alarms.shift();
    this.emit({ type: 'alarm', v: LIVE_VERSION, ...a });
  }

  result(r: Record<string, unknown>): void {
    this.resultValue = { ...r };
    this.emit({ type: 'result', v: LIVE_VERSION, result: this.resultValue });
  }

  /** A cutoff change, with who made it: viewers list it among the run's events. */
  cutoffChanged(cutoff_V: number, by?: string): void {
    this.cutoffV = cutoff_V;
    if (this.run) this.run.cutoff_V = cutoff_V;
    const host_s = this.latest?.host_s;
    this.emit({
      type: 'cutoff',
      v: LIVE_VERSION,
      cutoff_V,
      ...(by !== undefined ? { by } : {}),
      ...(host_s !== undefined ? { host_s } : {}),
    });
  }

  onControl(handler: ControlHandler): void {
    this.handler = handler;
  }

  /**
   * A control request from a viewer whose control token the server has already checked.
   * The floor is enforced here as well as in the daemon, so no path can go below it.
   */
  control(c: ControlRequest, by?: string): ControlReply {
    if (!this.run) return { ok: false, error: 'no run is active yet' };
    if (this.resultValue) return { ok: false, error: 'the run has ended' };
    if (!this.handler) return { ok: false, error: 'the daemon takes no control requests' };
    if (c.type === 'set-cutoff') {
      const floor = this.run.floor_V;
      if (!Number.isFinite(c.cutoff_V) || c.cutoff_V < floor)
        return {
          ok: false,
          error:
            `cutoff ${c.cutoff_V} V is below the safety floor of ${floor.toFixed(3)} V for ${this.run.cells} ${this.run.chemistry} cell(s); ` +
            "no command lowers it. To follow a cell maker's datasheet that allows less, start a run with a chemistry profile made from it (docs/chemistry-profiles.md)",
        };
      const endsNow = cutoffEndsRunNow(c.cutoff_V, this.latest?.voltage_V ?? null);
      if (endsNow !== null && c.confirm !== true) return { ok: false, error: endsNow };
    }
    const reply = this.handler(c, by);
    if (reply.ok && c.type === 'mark') {
      const mark = { host_s: this.latest?.host_s ?? 0, note: c.note };
      this.pushEvent({ kind: 'mark', ...mark });
      this.emit({ type: 'mark', v: LIVE_VERSION, ...mark });
    }
    return reply;
  }

  /** Receives every broadcast message; returns the unsubscribe function. */
  subscribe(listener: (m: BroadcastMessage) => void): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  /** The run's details, or null before one starts. */
  runInfo(): LiveRunInfo | null {
    return this.run ? { ...this.run } : null;
  }

  /** The newest alarm, or null. */
  lastAlarm(): LiveAlarm | null {
    const a = this.alarms[this.alarms.length - 1];
    return a ? { ...a } : null;
  }

  /** The result once the run has ended, else null. */
  resultOf(): Record<string, unknown> | null {
    return this.resultValue ? { ...this.resultValue } : null;
  }

  status(): FeedStatus {
    const est = this.estimator.estimate(this.cutoffV);
    return {
      sample: this.latest ? { ...this.latest } : null,
      state: this.stateName,
      cutoff_V: this.cutoffV,
      time_to_cutoff_s: this.resultValue ? null : est.time_to_cutoff_s,
      slope_V_per_s: est.slope_V_per_s,
      ended: this.resultValue !== null,
    };
  }

  /** The snapshot a viewer gets on connect: the run so far, its curve downsampled. */
  hello(): HelloMessage {
    const points = this.history.snapshot();
    const last = points[points.length - 1];
    if (this.latest && (!last || last[0] !== this.latest.host_s)) points.push(toPoint(this.latest));
    return {
      type: 'hello',
      v: LIVE_VERSION,
      ...(this.channel !== undefined ? { channel: this.channel } : {}),
      run: this.run ? { ...this.run } : null,
      status: this.status(),
      history: { fields: HISTORY_FIELDS, stride: this.history.stride, points },
      alarms: this.alarms.slice(),
      events: this.events.slice(),
      result: this.resultValue ? { ...this.resultValue } : null,
    };
  }

  private pushEvent(e: HubEvent): void {
    this.events.push(e);
    if (this.events.length > this.eventsKept) this.events.shift();
  }

  private emit(m: BroadcastMessage): void {
    if (this.channel !== undefined) m.channel = this.channel;
    for (const l of this.listeners) l(m);
  }
}

function toPoint(s: LiveSample): HistoryPoint {
  return [s.host_s, s.voltage_V, s.current_A, s.temperature_C, s.charge_Ah, s.energy_Wh];
}
