import type { Corrector } from '../calibration/calibration.js';
import {
  emptyFrameValues,
  FrameMeasure,
  type Converter,
  type FrameValues,
} from '../measure/frame-measure.js';
import { HelloExchange, type RigCapabilities } from '../protocol/capabilities.js';
import { decodeRigLine11 } from '../protocol/codec11.js';
import type { DataFrame, RejectReason, RigMessage } from '../protocol/messages.js';
import type { RigLineEvent } from '../record/event-log.js';
import type { TimeBaseOptions } from '../timebase/time-base.js';
import type { Session } from '../session/session.js';
import type { Action } from '../session/session-types.js';
import type { SampleRow } from '../sinks/sample-row.js';

export type { Converter } from '../measure/frame-measure.js';

export interface FrameCounters {
  accepted: number;
  rejected: number;
  lost: number;
  otherChannel: number;
  rejectedBy: Partial<Record<RejectReason, number>>;
}

export type LineOutcome =
  | {
      kind: 'sample';
      row: SampleRow;
      actions: Action[];
      lost: number;
      gap: boolean;
      rigRestart: boolean;
    }
  | { kind: 'rejected'; reason: RejectReason; detail: string }
  | { kind: 'message'; actions: Action[]; event: RigLineEvent }
  /** A protocol 1.1 capability line; the actions once the hello exchange is complete. */
  | { kind: 'capability'; actions: Action[] }
  | { kind: 'ignored' };

export interface PipelineOptions {
  channel: number;
  adcBits: number;
  converter: Converter;
  corrector: Corrector;
  session: Session;
  timeBase?: TimeBaseOptions;
  /** Host ms at which the run started; sample rows count seconds from it. */
  originMs: number;
  /** Counters carried on from an interrupted run's folder. */
  counters?: { accepted: number; rejected: number; lost: number };
  /** Amps per count of a 1.1 rig's charger monitor (frames with flag bit 4); null: none. */
  chargerAmpsPerCount?: number | null;
}

/**
 * The core, one direction: line -> codec -> frame measure (time base, analog chain,
 * calibration) -> session. Pure and synchronous; the caller supplies arrival and wall times and
 * carries the returned rows and actions to the sinks and the rig.
 */
export class Pipeline {
  readonly counters: FrameCounters;
  readonly measure: FrameMeasure;
  private readonly values: FrameValues = emptyFrameValues();
  private readonly exchange = new HelloExchange();
  private rigCaps: RigCapabilities | null = null;

  constructor(private readonly o: PipelineOptions) {
    this.measure = new FrameMeasure(
      o.converter,
      o.corrector,
      o.originMs,
      o.timeBase,
      o.chargerAmpsPerCount ?? null,
    );
    this.counters = {
      accepted: o.counters?.accepted ?? 0,
      rejected: o.counters?.rejected ?? 0,
      lost: o.counters?.lost ?? 0,
      otherChannel: 0,
      rejectedBy: {},
    };
  }

  get calibrationId(): string {
    return this.measure.calibrationId;
  }

  /** Integral of the uncorrected current while the load was on, for the uncertainty budget. */
  get nominalAh(): number {
    return this.measure.nominalAh;
  }

  rigClockErrorPpm(): number | null {
    return this.measure.rigClockErrorPpm();
  }

  /** A new calibration applies from the next frame on. */
  setCorrector(c: Corrector): void {
    this.measure.setCorrector(c);
  }

  /** A run of bytes the line splitter dropped for having no line end: counted like any bad line. */
  overlong(length: number): LineOutcome {
    return this.reject('overlong', `${length} bytes without a line end`);
  }

  private reject(reason: RejectReason, detail: string): LineOutcome {
    this.counters.rejected++;
    this.counters.rejectedBy[reason] = (this.counters.rejectedBy[reason] ?? 0) + 1;
    return { kind: 'rejected', reason, detail };
  }

  /** What the rig's last hello exchange declared (v1 or 1.1), or null before one completed. */
  get rig(): RigCapabilities | null {
    return this.rigCaps;
  }

  line(text: string, arrivalMs: number, wallMs: number): LineOutcome {
    // Every v1 line decodes exactly as the v1 codec decodes it; 1.1 adds the capability line.
    const decoded = decodeRigLine11(text, this.o.adcBits);
    const caps = this.exchange.feed(decoded);
    const capsActions = caps === null ? [] : this.o.session.capabilities(caps);
    if (caps !== null && !(caps instanceof Error)) this.rigCaps = caps;
    if (!decoded.ok) return this.reject(decoded.reason, decoded.detail);
    const m = decoded.message;
    if (m.kind === 'capability') return { kind: 'capability', actions: capsActions };
    const out =
      m.kind !== 'data'
        ? this.message(m, arrivalMs)
        : m.channel !== this.o.channel
          ? this.otherChannel()
          : this.frame(m, arrivalMs, wallMs);
    if (capsActions.length === 0) return out;
    if (out.kind === 'sample' || out.kind === 'message') out.actions.unshift(...capsActions);
    else return { kind: 'capability', actions: capsActions };
    return out;
  }

  private otherChannel(): LineOutcome {
    this.counters.otherChannel++;
    return { kind: 'ignored' };
  }

  private frame(m: DataFrame, arrivalMs: number, wallMs: number): LineOutcome {
    const session = this.o.session;
    this.counters.accepted++;
    const stamp = this.measure.stamp(m, arrivalMs);
    this.counters.lost += stamp.lost;
    const v = this.measure.values(m, this.values);
    this.measure.integrateNominal(v, stamp.dtMs);
    const actions = session.frame({
      hostMs: stamp.hostMs,
      dtMs: stamp.dtMs,
      gap: stamp.gap,
      volts: v.volts,
      amps: v.amps,
      celsius: v.celsius,
      thermistor: v.thermistor,
      flags: m.flags,
      nominalA: v.nominalA,
    });
    const row: SampleRow = {
      hostS: stamp.runMs / 1000,
      wallMs,
      channel: m.channel,
      seq: m.seq,
      tickMs: m.tickMs,
      vRaw: m.vRaw,
      iRaw: m.iRaw,
      tRaw: m.tRaw,
      flags: m.flags,
      volts: v.volts,
      amps: v.amps,
      celsius: v.celsius,
      chargeAh: session.integrator.chargeAh,
      energyWh: session.integrator.energyWh,
      state: session.state,
      calibrationId: this.measure.calibrationId,
    };
    const { lost, gap, rigRestart } = stamp;
    return { kind: 'sample', row, actions, lost, gap, rigRestart };
  }

  private message(m: Exclude<RigMessage, DataFrame>, arrivalMs: number): LineOutcome {
    switch (m.kind) {
      case 'ack':
        return {
          kind: 'message',
          actions: this.o.session.ack(m.command, m.args, arrivalMs),
          event: { event: 'rig_ack', command: m.command, args: m.args },
        };
      case 'hello': {
        const { rigId: rig_id, firmware, adcBits: adc_bits, channels } = m;
        const event: RigLineEvent = { event: 'rig_hello', rig_id, firmware, adc_bits, channels };
        return { kind: 'message', actions: [], event };
      }
      case 'rig-error':
        return {
          kind: 'message',
          actions: [],
          event: { event: 'rig_error', code: m.code, text: m.text },
        };
    }
  }
}
