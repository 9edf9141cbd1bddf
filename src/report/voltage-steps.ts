/**
 * Capacity and energy delivered down to each voltage step (every `step` volts per cell from
 * just below the first loaded voltage down to the cutoff). A step counts as passed when the
 * loaded voltage has stayed below it for `confirmFrames` loaded frames in a row, so one noisy
 * reading does not pass it; the figures are those at the first of those frames.
 */
export interface VoltageStepRow {
  perCellV: number;
  /** The whole string. */
  totalV: number;
  reached: boolean;
  chargeAh: number | null;
  energyWh: number | null;
  /** Load-on time when it was passed, s. */
  loadOnS: number | null;
}

export interface VoltageStepOptions {
  stepPerCellV: number;
  cells: number;
  cutoffPerCellV: number;
  /** @default 3 */
  confirmFrames?: number;
}

/** The step levels per cell, highest first: multiples of the step below `startPerCellV`, then the cutoff. */
export function stepLevels(
  startPerCellV: number,
  stepPerCellV: number,
  cutoffPerCellV: number,
): number[] {
  const round = (x: number): number => Math.round(x * 1e6) / 1e6;
  const top = Math.ceil(round(startPerCellV / stepPerCellV)) - 1;
  const bottom = Math.ceil(round(cutoffPerCellV / stepPerCellV));
  const levels: number[] = [];
  for (let k = top; k >= bottom; k--) levels.push(round(k * stepPerCellV));
  if (levels.at(-1) !== round(cutoffPerCellV)) levels.push(round(cutoffPerCellV));
  return levels;
}

export class VoltageSteps {
  private levels: number[] | null = null;
  private next = 0;
  private pending: { chargeAh: number; energyWh: number; loadOnS: number; frames: number } | null =
    null;
  private readonly passed: Array<{ chargeAh: number; energyWh: number; loadOnS: number }> = [];
  private readonly confirm: number;

  constructor(private readonly o: VoltageStepOptions) {
    this.confirm = o.confirmFrames ?? 3;
  }

  add(volts: number, loadOn: boolean, chargeAh: number, energyWh: number, loadOnS: number): void {
    if (!loadOn || !Number.isFinite(volts)) return;
    if (this.levels === null)
      this.levels = stepLevels(volts / this.o.cells, this.o.stepPerCellV, this.o.cutoffPerCellV);
    const level = this.levels[this.next];
    if (level === undefined) return;
    if (volts >= level * this.o.cells) {
      this.pending = null;
      return;
    }
    this.pending ??= { chargeAh, energyWh, loadOnS, frames: 0 };
    if (++this.pending.frames < this.confirm) return;
    // The same frames may pass several steps at once (a sudden drop): all get these figures.
    const at = this.pending;
    while (this.levels[this.next] !== undefined && volts < this.levels[this.next]! * this.o.cells) {
      this.passed.push({ chargeAh: at.chargeAh, energyWh: at.energyWh, loadOnS: at.loadOnS });
      this.next++;
    }
    this.pending = null;
  }

  rows(): VoltageStepRow[] {
    return (this.levels ?? []).map((perCellV, i) => {
      const p = this.passed[i];
      return {
        perCellV,
        totalV: Math.round(perCellV * this.o.cells * 1e6) / 1e6,
        reached: p !== undefined,
        chargeAh: p?.chargeAh ?? null,
        energyWh: p?.energyWh ?? null,
        loadOnS: p?.loadOnS ?? null,
      };
    });
  }
}
