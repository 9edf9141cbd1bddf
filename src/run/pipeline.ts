import type { Corrector } from '../calibration/calibration.js';
import {
  emptyFrameValues,
  FrameMeasure,
  type Converter,
  type FrameValues,
} from '../measure/frame-measure.js';
import { decodeRigLine } from '../protocol/codec.js';
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

  constructor(private readonly o: PipelineOptions) {
    this.measure = new FrameMeasure(o.converter, o.corrector, o.originMs, o.timeBase);
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

  line(text: string, arrivalMs: number, wallMs: number): LineOutcome {
    const decoded = decodeRigLine(text, this.o.adcBits);
    if (!decoded.ok) return this.reject(decoded.reason, decoded.detail);
    const m = decoded.message;
    if (m.kind !== 'data') return this.message(m, arrivalMs);
    if (m.channel !== this.o.channel) {
      this.counters.otherChannel++;
      return { kind: 'ignored' };
    }
    return this.frame(m, arrivalMs, wallMs);
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
