/**
 * Cells for the simulated rig: open-circuit voltage against state of charge, internal
 * resistance, and charge removal. The curves are plausible shapes, not data of any product.
 */
export const CHEMISTRY_IDS = [
  'alkaline',
  'nimh',
  'nicd',
  'li-ion',
  'lifepo4',
  'lead-acid',
] as const;
export type ChemistryId = (typeof CHEMISTRY_IDS)[number];

/** What the rig needs from a cell (or a series string of cells). */
export interface Cell {
  /** Open-circuit voltage of the string, volts. */
  ocvV(): number;
  /** DC internal resistance of the string at a cell temperature, ohms. */
  internalOhm(tempC: number): number;
  /** Draws `currentA` (positive = discharge) for `dtS` seconds. */
  step(dtS: number, currentA: number): void;
  /** 1 = full, 0 = empty; goes below 0 when the cell is driven past empty. */
  readonly stateOfCharge: number;
  /**
   * Polarisation volts on top of the open-circuit voltage (positive after charging, negative
   * after discharging), relaxing at rest; cells without the element omit it (zero).
   */
  overpotentialV?(): number;
}

interface ChemistryCurve {
  /** [state of charge, open-circuit volts per cell], ascending in state of charge. */
  ocv: ReadonlyArray<readonly [number, number]>;
  /** Typical DC internal resistance per cell of a mid-size cell, ohms. */
  internalOhm: number;
}

const CURVES: Record<ChemistryId, ChemistryCurve> = {
  'li-ion': {
    ocv: [
      [0, 2.5],
      [0.02, 3.0],
      [0.05, 3.3],
      [0.1, 3.45],
      [0.2, 3.55],
      [0.3, 3.62],
      [0.4, 3.68],
      [0.5, 3.74],
      [0.6, 3.82],
      [0.7, 3.9],
      [0.8, 3.98],
      [0.9, 4.07],
      [1, 4.18],
    ],
    internalOhm: 0.045,
  },
  lifepo4: {
    ocv: [
      [0, 2.5],
      [0.03, 2.9],
      [0.08, 3.15],
      [0.15, 3.22],
      [0.3, 3.27],
      [0.5, 3.3],
      [0.7, 3.32],
      [0.9, 3.34],
      [0.97, 3.4],
      [1, 3.5],
    ],
    internalOhm: 0.03,
  },
  nimh: {
    ocv: [
      [0, 0.95],
      [0.03, 1.05],
      [0.1, 1.15],
      [0.2, 1.2],
      [0.5, 1.25],
      [0.8, 1.3],
      [0.95, 1.36],
      [1, 1.42],
    ],
    internalOhm: 0.03,
  },
  nicd: {
    ocv: [
      [0, 0.9],
      [0.03, 1.05],
      [0.1, 1.15],
      [0.3, 1.2],
      [0.7, 1.24],
      [0.95, 1.3],
      [1, 1.38],
    ],
    internalOhm: 0.02,
  },
  alkaline: {
    ocv: [
      [0, 0.8],
      [0.05, 1.0],
      [0.2, 1.15],
      [0.5, 1.3],
      [0.8, 1.45],
      [0.95, 1.55],
      [1, 1.6],
    ],
    internalOhm: 0.15,
  },
  'lead-acid': {
    ocv: [
      [0, 1.75],
      [0.05, 1.9],
      [0.2, 1.96],
      [0.5, 2.03],
      [0.8, 2.08],
      [1, 2.12],
    ],
    internalOhm: 0.01,
  },
};

/** Volts per cell per unit of state of charge below empty: an over-driven cell collapses. */
const COLLAPSE_SLOPE = 40;

/**
 * Volts per cell per unit of state of charge above full: a full cell's voltage climbs steeply
 * when still pushed (1 % over full is 60 mV), which is what makes a constant-voltage charge
 * taper to its termination current.
 */
const OVERCHARGE_SLOPE = 6;

/** Open-circuit volts per cell at a state of charge: linear between the curve's points. */
export function ocvPerCell(chemistry: ChemistryId, soc: number): number {
  const pts = CURVES[chemistry].ocv;
  const first = pts[0]!;
  if (soc <= first[0]) return Math.max(0, first[1] - COLLAPSE_SLOPE * (first[0] - soc));
  for (let k = 1; k < pts.length; k++) {
    const [s1, v1] = pts[k]!;
    if (soc <= s1) {
      const [s0, v0] = pts[k - 1]!;
      return v0 + ((v1 - v0) * (soc - s0)) / (s1 - s0);
    }
  }
  const [sLast, vLast] = pts[pts.length - 1]!;
  return vLast + OVERCHARGE_SLOPE * (soc - sLast);
}

export function defaultInternalOhmPerCell(chemistry: ChemistryId): number {
  return CURVES[chemistry].internalOhm;
}

export interface ChemistryCellOptions {
  chemistry: ChemistryId;
  /** Cells in series. */
  cells: number;
  capacityAh: number;
  /** Starting state of charge, 0..1. */
  initialSoc: number;
  /** Internal resistance per cell at 25 °C and mid charge; the chemistry's typical value if omitted. */
  internalOhmPerCell?: number;
  /**
   * Polarisation (diffusion) resistance per cell, ohms, behind the internal resistance: under
   * a steady current it adds current × this after `polarizationTimeS`. Zero if omitted.
   */
  polarizationOhmPerCell?: number;
  /** Time constant of the polarisation, seconds; 60 if omitted. */
  polarizationTimeS?: number;
  /** A current the cell drains through itself (a soft internal short), amps; zero if omitted. */
  leakA?: number;
}

/** A series string of identical cells following one chemistry's curve. */
export class ChemistryCell implements Cell {
  private soc: number;
  private readonly r25: number;
  /** Polarisation volts of the whole string, positive after charging. */
  private vp = 0;

  constructor(private readonly opts: ChemistryCellOptions) {
    if (!(opts.capacityAh > 0))
      throw new RangeError(`capacity must be positive, got ${opts.capacityAh} Ah`);
    if (!Number.isInteger(opts.cells) || opts.cells < 1)
      throw new RangeError(`cells must be a whole number >= 1, got ${opts.cells}`);
    this.soc = opts.initialSoc;
    this.r25 = opts.internalOhmPerCell ?? defaultInternalOhmPerCell(opts.chemistry);
  }

  get stateOfCharge(): number {
    return this.soc;
  }

  ocvV(): number {
    return this.opts.cells * ocvPerCell(this.opts.chemistry, this.soc);
  }

  /**
   * Resistance rises towards empty (up to 2.5x below 15 % charge) and in the cold (about 3 %
   * per kelvin below 25 °C), falling a little when warm; both bounded to stay plausible.
   */
  internalOhm(tempC: number): number {
    const lowCharge = 1 + 1.5 * Math.min(1, Math.max(0, (0.15 - this.soc) / 0.15));
    const thermal = Math.min(8, Math.max(0.5, Math.exp(0.03 * (25 - tempC))));
    return this.opts.cells * this.r25 * lowCharge * thermal;
  }

  overpotentialV(): number {
    return this.vp;
  }

  step(dtS: number, currentA: number): void {
    const leak = this.opts.leakA ?? 0;
    this.soc -= ((currentA + leak) * dtS) / 3600 / this.opts.capacityAh;
    const rp = this.opts.cells * (this.opts.polarizationOhmPerCell ?? 0);
    if (rp === 0) return;
    // First-order relaxation towards −I·Rp, exact for a current constant over the step.
    const settle = -currentA * rp;
    this.vp = settle + (this.vp - settle) * Math.exp(-dtS / (this.opts.polarizationTimeS ?? 60));
  }
}
