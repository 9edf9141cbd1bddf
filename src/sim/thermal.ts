/**
 * Lumped thermal model of the cell: one heat capacity, one conductance to ambient. Heat comes
 * from the cell's own I²R, a share of the load resistor's heat (a cell boxed in with its
 * load), and an optional constant input (a warm neighbour the rig does not switch).
 */
export interface ThermalOptions {
  ambientC: number;
  heatCapacityJPerK: number;
  conductanceWPerK: number;
  /** Share (0..1) of the load resistor's heat that reaches the cell. */
  loadHeatFraction: number;
  /** Constant extra heat into the cell, watts. */
  extraHeatW: number;
}

export class ThermalModel {
  private t: number;

  constructor(private readonly opts: ThermalOptions) {
    if (!(opts.heatCapacityJPerK > 0))
      throw new RangeError(`heat capacity must be positive, got ${opts.heatCapacityJPerK} J/K`);
    if (!(opts.conductanceWPerK > 0))
      throw new RangeError(`conductance must be positive, got ${opts.conductanceWPerK} W/K`);
    this.t = opts.ambientC;
  }

  get temperatureC(): number {
    return this.t;
  }

  /** Heat into the cell, watts, for a current through the cell and load. */
  heatW(currentA: number, cellOhm: number, loadOhm: number): number {
    const i2 = currentA * currentA;
    return i2 * cellOhm + this.opts.loadHeatFraction * i2 * loadOhm + this.opts.extraHeatW;
  }

  /** Advances by `dtS` with constant heat input; exact exponential solution, stable for any step. */
  step(dtS: number, heatW: number): void {
    const g = this.opts.conductanceWPerK;
    const settle = this.opts.ambientC + heatW / g;
    this.t = settle + (this.t - settle) * Math.exp((-g * dtS) / this.opts.heatCapacityJPerK);
  }
}
