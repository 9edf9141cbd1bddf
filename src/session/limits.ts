import { Debounce } from './debounce.js';

export type LimitTrip =
  | { reason: 'cutoff'; detail: string }
  | { reason: 'over_temperature'; detail: string }
  | { reason: 'fault'; detail: string };

export interface LimitSettings {
  /** End-of-discharge voltage of the whole series string, V. */
  cutoffV: number;
  maxTemperatureC: number;
  maxCurrentA: number;
  /** @default 1000 */
  debounceMs?: number;
  /** @default 3 */
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
 * waits out the debounce time too, since a loaded voltage is noisy near the knee.
 */
export class Limits {
  private cutoffV: number;
  private maxT: number;
  private readonly maxI: number;
  private readonly cutoff: Debounce;
  private readonly hot: Debounce;
  private readonly sensor: Debounce;
  private readonly current: Debounce;

  constructor(s: LimitSettings) {
    this.cutoffV = s.cutoffV;
    this.maxT = s.maxTemperatureC;
    this.maxI = s.maxCurrentA;
    const frames = s.debounceFrames ?? 3;
    this.cutoff = new Debounce(s.debounceMs ?? 1000, frames);
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
    if (this.cutoff.update(x.loadOn && x.volts < this.cutoffV, x.atMs))
      return {
        reason: 'cutoff',
        detail: `${x.volts.toFixed(3)} V held below the cutoff of ${this.cutoffV.toFixed(3)} V`,
      };
    return null;
  }
}
