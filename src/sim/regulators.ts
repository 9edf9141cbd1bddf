/**
 * The two regulated parts a protocol 1.1 rig adds to a channel, as physics: a constant-current
 * load (a MOSFET held by an op-amp, trimmed by the firmware) and a charger module (constant
 * current up to its charge voltage, then constant voltage until the current falls to its
 * termination current). Both are pure: the cell's state and the setpoint in, the current out.
 */
import type { ElectricalPoint } from './truth.js';

/** A constant-current load's figures (scenario `load.constant_current`). */
export interface ConstantCurrentOptions {
  /** The setpoint range the rig declares, in counts of the current input. */
  iMinRaw: number;
  iMaxRaw: number;
  /** The trim's residual error as a fraction of the current (+0.004 draws 0.4 % high). */
  trimError: number;
  /** Standard deviation of the loop's ripple on the true current, amps. */
  rippleA: number;
}

/** A charger module's figures (scenario `charger`). */
export interface ChargerOptions {
  /** Constant-current phase, amps. */
  currentA: number;
  /** Constant-voltage phase, volts at the cell (the whole string). */
  chargeV: number;
  /** The charger ends its charge when the current falls below this in constant voltage, amps. */
  terminationA: number;
  /** Heat from the charger module that reaches the cell while it charges, watts. */
  heatToCellW: number;
  /** The monitor output: amps per volt at the ADC pin (the rig profile's `charger.monitor_A_per_V`). */
  monitorAPerV: number;
}

/** The cell as a regulator sees it: its EMF (open-circuit volts plus polarisation) and resistance. */
export interface CellSource {
  emfV: number;
  internalOhm: number;
}

export interface LoadPoint extends ElectricalPoint {
  /** The trim is at its bound: the cell cannot drive the setpoint's current (flag bit 5). */
  notHeld: boolean;
}

/**
 * A constant-current load drawing `targetA` through `seriesOhm` (source resistor, MOSFET fully
 * on, shunt, wiring). It holds the target (with its trim error and ripple) while the cell can
 * drive it; once the cell's EMF over the whole loop's resistance is less, the MOSFET is fully
 * on, the current is what the resistance lets through, and the trim sits at its bound.
 */
export function constantCurrentPoint(
  cell: CellSource,
  targetA: number,
  seriesOhm: number,
  cc: ConstantCurrentOptions,
  ripple: number,
): LoadPoint {
  const want = targetA * (1 + cc.trimError);
  const available = Math.max(0, cell.emfV / (cell.internalOhm + seriesOhm));
  const notHeld = available < want;
  const currentA = notHeld ? available : Math.max(0, want + cc.rippleA * ripple);
  return { currentA, terminalV: cell.emfV - currentA * cell.internalOhm, notHeld };
}

export type ChargePhase = 'cc' | 'cv' | 'done';

/**
 * A charger module. While enabled it drives the cell at its constant current until the
 * terminal voltage reaches the charge voltage, then holds that voltage with the current
 * tapering, and ends its charge when the current falls below the termination current; it
 * starts again only when switched off and on. Currents here are into the cell (positive).
 */
export class Charger {
  private phase: ChargePhase = 'cc';

  constructor(readonly opts: ChargerOptions) {
    if (!(opts.currentA > 0 && opts.chargeV > 0 && opts.terminationA >= 0))
      throw new RangeError('a charger needs a positive current and charge voltage');
    if (opts.terminationA >= opts.currentA)
      throw new RangeError('the termination current must be below the charge current');
  }

  get chargePhase(): ChargePhase {
    return this.phase;
  }

  /** Switched on: a fresh charge begins in constant current. */
  restart(): void {
    this.phase = 'cc';
  }

  /** The current into the cell and its terminal voltage now; steps the phase. */
  point(cell: CellSource): ElectricalPoint {
    if (this.phase === 'done') return { currentA: 0, terminalV: cell.emfV };
    const cvA = (this.opts.chargeV - cell.emfV) / cell.internalOhm;
    const intoA = Math.max(0, Math.min(this.opts.currentA, cvA));
    if (intoA < this.opts.currentA) this.phase = 'cv';
    if (this.phase === 'cv' && intoA < this.opts.terminationA) {
      this.phase = 'done';
      return { currentA: 0, terminalV: cell.emfV };
    }
    // Run convention: negative current flows into the cell; the terminal sits above the EMF.
    return { currentA: -intoA, terminalV: cell.emfV + intoA * cell.internalOhm };
  }
}
