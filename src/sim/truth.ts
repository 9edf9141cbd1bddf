/**
 * What really happened in a simulated run, for tests to compare the host's figures against:
 * charge and energy by the trapezoid rule over the physics steps, and time under load.
 */
export interface ElectricalPoint {
  currentA: number;
  /** Cell terminal volts (open-circuit volts less the internal drop). */
  terminalV: number;
}

export class TruthRecorder {
  chargeAh = 0;
  /** Energy delivered at the cell terminals, which is what the rig can measure. */
  energyWh = 0;
  loadOnS = 0;
  elapsedS = 0;
  /** Charge put into the cell (currents below zero), amp-hours, by the same rule. */
  chargedAh = 0;

  /** Adds a step of `dtS` seconds from point `a` to point `b`, the load state fixed within it. */
  add(dtS: number, a: ElectricalPoint, b: ElectricalPoint, loadOn: boolean): void {
    this.chargeAh += ((a.currentA + b.currentA) / 2) * (dtS / 3600);
    this.energyWh += ((a.currentA * a.terminalV + b.currentA * b.terminalV) / 2) * (dtS / 3600);
    if (a.currentA < 0 || b.currentA < 0)
      this.chargedAh -= ((Math.min(0, a.currentA) + Math.min(0, b.currentA)) / 2) * (dtS / 3600);
    if (loadOn) this.loadOnS += dtS;
    this.elapsedS += dtS;
  }
}
