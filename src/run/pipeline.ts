import { decodeRigLine } from '../protocol/codec.js';
import { FLAG_LOAD_ON, type RejectReason } from '../protocol/messages.js';
import { TimeBase, type TimeBaseOptions } from '../timebase/time-base.js';
import type { Session } from '../session/session.js';
import type { Action } from '../session/session-types.js';
import type { SampleRow } from '../sinks/sample-row.js';
import type { RunEvent } from '../record/events.js';

/** Counts to nominal units: the rig profile's analog chain. */
export interface Converter {
  volts(raw: number): number;
  amps(raw: number): number;
  celsius(raw: number): number;
  thermistorState(raw: number): 'ok' | 'open' | 'short';
}

/** Nominal to corrected units: the calibration in force (id 'none' without one). */
export interface Corrector {
  readonly id: string;
  voltage(x: number): number;
  current(x: number): number;
  temperature(x: number): number;
}

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
  | {
      kind: 'message';
      actions: Action[];
      event: RunEvent | null;
    }
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
}

/**
 * The core, one direction: line -> codec -> time base -> analog chain -> calibration ->
 * session. Pure and synchronous; the caller supplies arrival and wall times and carries the
 * returned rows and actions to the sinks and the rig.
 */
export class Pipeline {
  readonly counters: FrameCounters = {
    accepted: 0,
    rejected: 0,
    lost: 0,
    otherChannel: 0,
    rejectedBy: {},
  };
  readonly timeBase: TimeBase;
  private corrector: Corrector;
  /** Integral of the uncorrected current while the load was on, for the uncertainty budget. */
  nominalAh = 0;
  private prevNominalA = 0;

  constructor(private readonly o: PipelineOptions) {
    this.timeBase = new TimeBase(o.timeBase);
    this.corrector = o.corrector;
  }

  get calibrationId(): string {
    return this.corrector.id;
  }

  /** A new calibration applies from the next frame on. */
  setCorrector(c: Corrector): void {
    this.corrector = c;
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
    const session = this.o.session;
    switch (m.kind) {
      case 'data': {
        if (m.channel !== this.o.channel) {
          this.counters.otherChannel++;
          return { kind: 'ignored' };
        }
        this.counters.accepted++;
        const stamp = this.timeBase.stamp(m.seq, m.tickMs, arrivalMs);
        this.counters.lost += stamp.lost;
        const { converter: chain } = this.o;
        const c = this.corrector;
        const nominalA = chain.amps(m.iRaw);
        const thermistor = chain.thermistorState(m.tRaw);
        const volts = c.voltage(chain.volts(m.vRaw));
        const amps = c.current(nominalA);
        const celsius = thermistor === 'ok' ? c.temperature(chain.celsius(m.tRaw)) : Number.NaN;
        const loadOn = (m.flags & FLAG_LOAD_ON) !== 0;
        const onA = loadOn ? nominalA : 0;
        this.nominalAh += ((this.prevNominalA + onA) / 2) * (stamp.dtMs / 3_600_000);
        this.prevNominalA = onA;
        const actions = session.frame({
          hostMs: stamp.hostMs,
          dtMs: stamp.dtMs,
          gap: stamp.gap,
          volts,
          amps,
          celsius,
          thermistor,
          flags: m.flags,
        });
        const row: SampleRow = {
          hostS: (stamp.hostMs - this.o.originMs) / 1000,
          wallMs,
          channel: m.channel,
          seq: m.seq,
          tickMs: m.tickMs,
          vRaw: m.vRaw,
          iRaw: m.iRaw,
          tRaw: m.tRaw,
          flags: m.flags,
          volts,
          amps,
          celsius,
          chargeAh: session.integrator.chargeAh,
          energyWh: session.integrator.energyWh,
          state: session.state,
          calibrationId: c.id,
        };
        return {
          kind: 'sample',
          row,
          actions,
          lost: stamp.lost,
          gap: stamp.gap,
          rigRestart: stamp.rigRestart,
        };
      }
      case 'ack':
        return {
          kind: 'message',
          actions: session.ack(m.command, m.args),
          event: { event: 'rig_ack', command: m.command, args: m.args },
        };
      case 'hello':
        return {
          kind: 'message',
          actions: [],
          event: {
            event: 'rig_hello',
            rig_id: m.rigId,
            firmware: m.firmware,
            adc_bits: m.adcBits,
            channels: m.channels,
          },
        };
      case 'rig-error':
        return {
          kind: 'message',
          actions: [],
          event: { event: 'rig_error', code: m.code, text: m.text },
        };
    }
  }
}
