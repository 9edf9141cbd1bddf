/**
 * What went in or out of the cell during each segment of a program run: charge and energy
 * moved (magnitudes), on-time, mean current, end voltage and their uncertainty. Written once
 * for the live run and the report's recompute, which feed it the same frames in the same order
 * and so get the same figures to the last digit. Pure: frames in, figures out.
 */
import type { Calibration } from '../calibration/calibration.js';
import { frameState } from '../protocol/frame-state.js';
import type { SegmentFigures, SegmentLine } from './segment-figures.js';
import { runUncertainty } from '../results/uncertainty.js';
import { Integrator } from '../session/integrator.js';

/** One measured frame as the accounting takes it. */
export interface AccountedFrame {
  /** Step from the frame before, whole ms. */
  dtMs: number;
  gap: boolean;
  volts: number;
  /** Signed: positive out of the cell, negative into it. */
  amps: number;
  /** The uncorrected current's magnitude (for the calibration term of the budget). */
  nominalA: number;
  flags: number;
}

export function emptyAccountedFrame(): AccountedFrame {
  return { dtMs: 0, gap: false, volts: 0, amps: 0, nominalA: 0, flags: 0 };
}

export interface AccountingSettings {
  /** Highest believable string voltage, V (above it a frame is a fault of the wiring). */
  maxVolts: number;
  /** Amps of one count of the load's and of the charger's current input. */
  ampsPerCount: number;
  chargerAmpsPerCount: number | null;
  voltsPerCount: number;
  calibration: Calibration | null;
}

const MS_PER_HOUR = 3_600_000;
/** Loaded current below which a switch-on step gives no resistance (noise would dominate). */
const MIN_STEP_A = 0.005;
const r = (x: number, digits: number): number => Number(x.toFixed(digits));

/**
 * Why a frame cannot be physically true, or null: flags no rig can mean (a load and a charger
 * together, a charge current outside charge mode), or a voltage off the scale of the cell.
 */
export function implausibleFrame(f: Readonly<AccountedFrame>, maxVolts: number): string | null {
  const st = frameState(f.flags);
  if ('invalid' in st) return `flags ${f.flags.toString(16)}: ${st.invalid}`;
  if (!Number.isFinite(f.volts) || !Number.isFinite(f.amps))
    return 'a reading that is not a number';
  if (f.volts < 0 || f.volts > maxVolts)
    return `${f.volts.toFixed(3)} V is outside 0..${maxVolts.toFixed(3)} V for this cell`;
  return null;
}

/** True when the frame says a load or a charger is on. */
function currentFlows(flags: number): boolean {
  const st = frameState(flags);
  return !('invalid' in st) && st.mode !== 'rest';
}

export class SegmentAccounting {
  private nominalAh = 0;
  private prevNominalA = 0;
  private samples = 0;
  private endV: number | null = null;
  private seeded = false;
  private active = false;
  /** The last plausible frame with nothing on, V: the open-circuit voltage before a switch-on. */
  private restV: number | null = null;
  private prevOn = false;
  /** The segment's switch-on step (rest to load): U_open, and R = (U_open − U_load) / I_load. */
  private openV: number | null = null;
  private stepOhm: number | null = null;

  /**
   * @param integ the integrator whose totals the sample rows show (the live session's), or a
   *   fresh one (the recompute).
   */
  constructor(
    private readonly s: AccountingSettings,
    private readonly integ: Integrator = new Integrator(),
  ) {}

  get isActive(): boolean {
    return this.active;
  }

  /** Charge and energy of the running segment so far (the sample rows' running totals). */
  get chargeAh(): number {
    return this.integ.chargeAh;
  }

  get energyWh(): number {
    return this.integ.energyWh;
  }

  /** A segment starts at frame `f` (the frame that ended the one before, or the program's first). */
  begin(f: Readonly<AccountedFrame>): void {
    this.integ.zeroTotals();
    this.nominalAh = 0;
    this.samples = 0;
    this.endV = null;
    this.openV = null;
    this.stepOhm = null;
    this.active = true;
    if (!this.seeded) {
      this.seeded = true;
      this.add(f);
    }
  }

  /** One frame of the running segment; false when it was left out as implausible. */
  add(f: Readonly<AccountedFrame>): boolean {
    const on = currentFlows(f.flags);
    if (implausibleFrame(f, this.s.maxVolts) !== null) {
      this.integ.hold(f.dtMs, on);
      return false;
    }
    this.integ.add(f.dtMs, f.volts, Math.abs(f.amps), on, f.gap);
    const onN = on ? f.nominalA : 0;
    if (f.dtMs > 0) this.nominalAh += ((this.prevNominalA + onN) / 2) * (f.dtMs / MS_PER_HOUR);
    this.prevNominalA = onN;
    if (on) this.samples++;
    this.endV = f.volts;
    this.switchOnStep(f, on);
    return true;
  }

  /**
   * The DC internal resistance at the segment's first switch-on of a load, from the resting
   * voltage just before and the first loaded frame (the load-step method of the live session).
   * The first frame also holds what polarisation one frame period builds up.
   */
  private switchOnStep(f: Readonly<AccountedFrame>, on: boolean): void {
    if (on && !this.prevOn && this.openV === null && this.restV !== null && f.amps >= MIN_STEP_A) {
      this.openV = this.restV;
      this.stepOhm = (this.restV - f.volts) / f.amps;
    }
    if (!on) this.restV = f.volts;
    this.prevOn = on;
  }

  /** The running segment is over (or was cut off by an interruption): its figures. */
  close(
    seg: Omit<SegmentLine, 'end_reason'> & {
      end_reason: SegmentLine['end_reason'] | 'interrupted';
    },
  ): SegmentFigures {
    this.active = false;
    const { integ, s } = this;
    const charger = seg.kind === 'charge';
    const meanV = integ.chargeAh > 0 ? integ.energyWh / integ.chargeAh : 0;
    const uncertainty = runUncertainty({
      chargeAh: integ.chargeAh,
      energyWh: integ.energyWh,
      nominalAh: this.nominalAh,
      onS: integ.onMs / 1000,
      samples: this.samples,
      ampsPerCount: charger ? (s.chargerAmpsPerCount ?? s.ampsPerCount) : s.ampsPerCount,
      voltsPerCount: s.voltsPerCount,
      meanVoltageV: meanV,
      bridgedAh: integ.bridgedAh,
      // The load's calibration says nothing of a charger's monitor: it counts as uncalibrated.
      calibration: charger ? null : s.calibration,
      loadSwitches: integ.switches,
    });
    return {
      index: seg.index,
      kind: seg.kind,
      purpose: seg.purpose,
      step: seg.step,
      cycle: seg.cycle,
      started_ms: seg.started_ms,
      ended_ms: seg.ended_ms,
      end_reason: seg.end_reason,
      setpoint: seg.setpoint,
      duration_s: r((seg.ended_ms - seg.started_ms) / 1000, 3),
      charge_Ah: r(integ.chargeAh, 6),
      energy_Wh: r(integ.energyWh, 6),
      mean_current_A: integ.onMs > 0 ? r(integ.chargeAh / (integ.onMs / MS_PER_HOUR), 6) : null,
      end_voltage_V: this.endV === null ? null : r(this.endV, 5),
      open_circuit_V: this.openV === null ? null : r(this.openV, 5),
      dc_resistance_ohm: this.stepOhm === null ? null : r(this.stepOhm, 5),
      uncertainty: { charge_Ah: uncertainty.capacity_Ah, energy_Wh: uncertainty.energy_Wh },
    };
  }
}
