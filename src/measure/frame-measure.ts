/**
 * The measuring step, written once: a frame's raw counts -> the rig profile's analog chain -> the
 * calibration in force, its place on the host clock from the time base, and the charge through
 * the uncorrected chain for the uncertainty budget. The live pipeline measures frames as they
 * arrive; the report's recompute measures the same frames again from their logged rows.
 */
import type { Corrector } from '../calibration/calibration.js';
import { TimeBase, type Stamp, type TimeBaseOptions } from '../timebase/time-base.js';
import { FLAG_INTO_CELL, FLAG_LOAD_ON } from '../protocol/messages.js';

/** Counts to nominal units: the rig profile's analog chain. */
export interface Converter {
  volts(raw: number): number;
  amps(raw: number): number;
  celsius(raw: number): number;
  thermistorState(raw: number): 'ok' | 'open' | 'short';
}

/** What a frame carries, as the codec decodes it and as a sample row logs it. */
export interface FrameCounts {
  seq: number;
  tickMs: number;
  vRaw: number;
  iRaw: number;
  tRaw: number;
  flags: number;
}

/** A frame's values in corrected units. */
export interface FrameValues {
  volts: number;
  amps: number;
  /**
   * The current through the nominal chain, before the calibration (a 1.1 charger's current:
   * its monitor reading, a magnitude).
   */
  nominalA: number;
  /** NaN when the thermistor is open or shorted. */
  celsius: number;
  thermistor: 'ok' | 'open' | 'short';
  loadOn: boolean;
}

/**
 * A frame's place in time. `runMs` is whole milliseconds since the run's origin, as the sample
 * row logs it; `hostMs` is the same instant on the host's clock, and `dtMs` the step from the
 * frame before in whole milliseconds: what is integrated is exactly what is logged.
 */
export interface FrameTime extends Stamp {
  runMs: number;
}

/** Frames this far apart on the host clock are a gap: their charge is counted as doubt. */
export const LONG_GAP_MS = 2000;
/** Thermistor counts remembered with their °C, by the count's low bits. */
const CELSIUS_SLOTS = 4096;
const MS_PER_HOUR = 3_600_000;
const THERMISTOR_STATES = ['ok', 'open', 'short'] as const;

export function emptyFrameValues(): FrameValues {
  return { volts: 0, amps: 0, nominalA: 0, celsius: 0, thermistor: 'ok', loadOn: false };
}

export function emptyFrameTime(): FrameTime {
  return { runMs: 0, hostMs: 0, dtMs: 0, lost: 0, gap: false, rigRestart: false };
}

export class FrameMeasure {
  private timeBase: TimeBase;
  private corrector: Corrector;
  /** Integral of the uncorrected current while the load was on, for the uncertainty budget. */
  nominalAh = 0;
  private prevNominalA = 0;
  private prevRunMs: number | null = null;
  // °C by thermistor count, for the last count seen in each slot: the count wanders over a few
  // values, each a logarithm to work out.
  private readonly celsiusCounts = new Float64Array(CELSIUS_SLOTS).fill(-1);
  private readonly celsiusValues = new Float64Array(CELSIUS_SLOTS);
  private readonly thermistorStates = new Uint8Array(CELSIUS_SLOTS);
  private readonly liveTime: FrameTime = emptyFrameTime();
  private readonly loggedStamp: FrameTime = emptyFrameTime();

  /**
   * @param originMs host ms of the run's origin (live frames); logged frames carry their own time.
   */
  constructor(
    private readonly chain: Converter,
    corrector: Corrector,
    private readonly originMs = 0,
    private readonly timeBaseOptions: TimeBaseOptions = {},
    /**
     * A protocol 1.1 rig's charger: amps per count of `i_raw` while a frame's flag bit 4 says
     * the current flows into the cell (ADC volts per count × the profile's monitor_A_per_V);
     * null for a rig without one, whose frames read exactly as v1.
     */
    private readonly chargerAmpsPerCount: number | null = null,
  ) {
    this.corrector = corrector;
    this.timeBase = this.newTimeBase();
  }

  get calibrationId(): string {
    return this.corrector.id;
  }

  /** A new calibration applies from the next frame on. */
  setCorrector(c: Corrector): void {
    this.corrector = c;
    this.celsiusCounts.fill(-1);
  }

  rigClockErrorPpm(): number | null {
    return this.timeBase.rigClockErrorPpm();
  }

  /**
   * A live frame, placed on the host clock by the time base from its arrival. The same object
   * comes back for every frame (one a frame would be garbage a frame): read it at once.
   */
  stamp(f: Readonly<FrameCounts>, arrivalMs: number): FrameTime {
    const t = this.timeBase.stamp(f.seq, f.tickMs, arrivalMs, this.liveTime) as FrameTime;
    t.runMs = Math.round(t.hostMs - this.originMs);
    t.hostMs = this.originMs + t.runMs;
    t.dtMs = this.step(t.runMs);
    return t;
  }

  /**
   * A logged frame: its time was fixed when it was logged (`out.runMs`, filled in by the
   * caller); the time base still finds lost frames, rig restarts and gaps, and the rig's clock rate.
   */
  restamp(f: Readonly<FrameCounts>, out: FrameTime): FrameTime {
    const s = this.timeBase.stamp(f.seq, f.tickMs, out.runMs, this.loggedStamp);
    out.hostMs = out.runMs;
    out.dtMs = this.step(out.runMs);
    out.lost = s.lost;
    out.gap = s.gap;
    out.rigRestart = s.rigRestart;
    return out;
  }

  private step(runMs: number): number {
    const prev = this.prevRunMs;
    this.prevRunMs = runMs;
    return prev === null ? 0 : runMs - prev;
  }

  /** The frame's counts in corrected units, written into `out`. */
  values(f: Readonly<FrameCounts>, out: FrameValues): FrameValues {
    const { chain, corrector: c } = this;
    out.volts = c.voltage(chain.volts(f.vRaw));
    if ((f.flags & FLAG_INTO_CELL) !== 0 && this.chargerAmpsPerCount !== null) {
      // The charger's own monitor: the load's calibration does not apply; signed into the cell.
      out.nominalA = f.iRaw * this.chargerAmpsPerCount;
      out.amps = -out.nominalA;
    } else {
      out.nominalA = chain.amps(f.iRaw);
      out.amps = c.current(out.nominalA);
    }
    out.loadOn = (f.flags & FLAG_LOAD_ON) !== 0;
    const slot = f.tRaw & (CELSIUS_SLOTS - 1);
    if (this.celsiusCounts[slot] !== f.tRaw) {
      const state = chain.thermistorState(f.tRaw);
      this.celsiusCounts[slot] = f.tRaw;
      this.thermistorStates[slot] = THERMISTOR_STATES.indexOf(state);
      this.celsiusValues[slot] = state === 'ok' ? c.temperature(chain.celsius(f.tRaw)) : Number.NaN;
    }
    out.celsius = this.celsiusValues[slot]!;
    out.thermistor = THERMISTOR_STATES[this.thermistorStates[slot]!]!;
    return out;
  }

  /** The trapezoid of the uncorrected current while the load is on, over `dtMs` from the frame before. */
  integrateNominal(v: Readonly<FrameValues>, dtMs: number): void {
    const onA = v.loadOn ? v.nominalA : 0;
    this.nominalAh += ((this.prevNominalA + onA) / 2) * (dtMs / MS_PER_HOUR);
    this.prevNominalA = onA;
  }

  /** Charge estimated while nothing was logging, at the last logged uncorrected current. */
  addUnloggedNominal(nominalA: number, ms: number): void {
    this.nominalAh += nominalA * (ms / MS_PER_HOUR);
  }

  /** A new segment (a resumed run): the time base starts afresh and nothing is bridged from before. */
  newSegment(): void {
    this.timeBase = this.newTimeBase();
    this.prevNominalA = 0;
    this.prevRunMs = null;
  }

  private newTimeBase(): TimeBase {
    return new TimeBase({ longGapMs: LONG_GAP_MS, ...this.timeBaseOptions });
  }
}
