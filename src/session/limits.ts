import { Debounce } from './debounce.js';

export type LimitTrip =
  | { reason: 'cutoff'; detail: string }
  | { reason: 'over_temperature'; detail: string }
  | { reason: 'fault'; detail: string };

/** How long the loaded voltage must stay below the cutoff before the load goes off. */
export const CUTOFF_HOLD_MS = 500;
/** And for how many consecutive frames at least (one noisy frame never ends a run). */
export const CUTOFF_HOLD_FRAMES = 3;

export interface LimitSettings {
  /** End-of-discharge voltage of the whole series string, V. */
  cutoffV: number;
  /**
   * The safety floor of the whole string, V: a loaded reading at or below it switches the load
   * off at once, without the cutoff's hold. Absent: only the cutoff is checked.
   */
  floorV?: number;
  maxTemperatureC: number;
  maxCurrentA: number;
  /** @default CUTOFF_HOLD_MS */
  debounceMs?: number;
  /** @default CUTOFF_HOLD_FRAMES */
  debounceFrames?: number;
}

export interface LimitInput {
  atMs: number;
  volts: number;
  amps: number;
  celsius: number;
  thermistor: 'ok' | 'open' | 'short';
  loadOn: boolean;
  rigFault: boolean;
  /**
   * False for a frame whose voltage or current cannot be true: it neither advances nor resets
   * the current and cutoff debounces. @default true
   */
  readingsPlausible?: boolean;
}

/**
 * The safety limits, checked in one place per frame. Temperature, thermistor and current
 * trips need only consecutive frames (a hot cell should not wait a second more); the cutoff
 * waits out a short hold too, since a loaded voltage is noisy near the knee. The hold never
 * reaches the floor: a loaded reading at or below the floor cuts at once.
 */
export class Limits {
  private cutoffV: number;
  private floorV: number | null;
  private maxT: number;
  private readonly maxI: number;
  private readonly cutoff: Debounce;
  private readonly hot: Debounce;
  private readonly sensor: Debounce;
  private readonly current: Debounce;

  constructor(s: LimitSettings) {
    this.cutoffV = s.cutoffV;
    this.floorV = s.floorV ?? null;
    this.maxT = s.maxTemperatureC;
    this.maxI = s.maxCurrentA;
    const frames = s.debounceFrames ?? CUTOFF_HOLD_FRAMES;
    this.cutoff = new Debounce(s.debounceMs ?? CUTOFF_HOLD_MS, frames);
    this.hot = new Debounce(0, frames);
    this.sensor = new Debounce(0, frames);
    this.current = new Debounce(0, frames);
  }

  get cutoffVolts(): number {
    return this.cutoffV;
  }

  /** Changes the cutoff mid-run; the caller has already checked it against the floor. */
  setCutoff(volts: number): void {
    this.cutoffV = volts;
    this.cutoff.reset();
  }

  /** Changes the floor mid-run (a chemistry file edited and validated). */
  setFloor(volts: number): void {
    this.floorV = volts;
  }

  /** Changes the temperature limit mid-run (a chemistry file edited and validated). */
  setMaxTemperature(celsius: number): void {
    this.maxT = celsius;
  }

  check(x: LimitInput): LimitTrip | null {
    if (x.rigFault)
      return {
        reason: 'fault',
        detail: 'rig_fault: the rig switched its load off by itself (flag bit 1)',
      };
    if (this.sensor.update(x.thermistor !== 'ok', x.atMs))
      return {
        reason: 'fault',
        detail: `thermistor_${x.thermistor}: the cell temperature cannot be read`,
      };
    if (this.hot.update(x.thermistor === 'ok' && x.celsius > this.maxT, x.atMs))
      return {
        reason: 'over_temperature',
        detail: `${x.celsius.toFixed(1)} °C is above the limit of ${this.maxT} °C`,
      };
    if (x.readingsPlausible === false) return null;
    if (this.current.update(x.loadOn && x.amps > this.maxI, x.atMs))
      return {
        reason: 'fault',
        detail: `over_current: ${x.amps.toFixed(3)} A is above the limit of ${this.maxI} A`,
      };
    return this.checkCutoff(x);
  }

  private checkCutoff(x: LimitInput): LimitTrip | null {
    if (x.loadOn && this.floorV !== null && x.volts <= this.floorV) {
      this.cutoff.reset();
      return {
        reason: 'cutoff',
        detail: `${x.volts.toFixed(3)} V reached the safety floor of ${this.floorV.toFixed(3)} V: switched off at once`,
      };
    }
    const below = x.loadOn && x.volts < this.cutoffV;
    if (!this.cutoff.update(below, x.atMs)) return null;
    const frames = this.cutoff.frames;
    const heldS = this.cutoff.heldMs(x.atMs) / 1000;
    return {
      reason: 'cutoff',
      detail: `fell below the cutoff of ${this.cutoffV.toFixed(3)} V for ${frames} frames / ${heldS.toFixed(1)} s (last ${x.volts.toFixed(3)} V)`,
    };
  }
}

/**
 * Why a new cutoff (whole string, V) would end the run on the spot, or null when it would not:
 * at or above the present voltage, the very next frames are below it. Such a change is a slip
 * (5 V typed for a 4.1 V cell) more often than a wish, so it needs to be confirmed.
 */
export function cutoffEndsRunNow(cutoffV: number, presentV: number | null): string | null {
  if (presentV === null || !(cutoffV >= presentV)) return null;
  return (
    `a cutoff of ${cutoffV.toFixed(3)} V is at or above the present voltage of ${presentV.toFixed(3)} V: ` +
    'it would end the run now. If that is what you mean, send it again confirmed ' +
    '(`cellvigil control <channel> cutoff <V> --confirm`, or confirm on the live page)'
  );
}
