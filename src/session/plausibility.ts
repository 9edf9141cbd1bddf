import { Debounce } from './debounce.js';

/**
 * A loaded cell reads below its resting voltage (terminal volts = open-circuit volts less the
 * drop across its internal resistance), so with the load on nothing above the chemistry's
 * highest resting voltage × cells is expected at all. The headroom on top covers an
 * uncalibrated board's voltage gain error (a few percent) and noise with room to spare: a
 * reading beyond it is a fault of the wiring, the sense line or the calibration, not the cell.
 */
export const VOLTAGE_HEADROOM = 0.25;
/**
 * Half-width of "no current": this many counts of the current channel around the reading with
 * the load off (which carries the channel's offset, calibrated or not), or this many standard
 * deviations of those load-off readings when they are noisier.
 */
export const ZERO_BAND_COUNTS = 3;
export const ZERO_BAND_SD = 4;
/** Load-off readings needed before their mean is taken as the channel's zero. */
const ZERO_MIN_FRAMES = 3;
/** Implausible frames listed one by one in the event log before only summaries follow. */
const LISTED_IN_FULL = 10;
/** At most one summary of implausible frames per this much host time. */
const SUMMARY_EVERY_MS = 60_000;

export interface PlausibilitySettings {
  /** Highest believable whole-string voltage with the load on, V. */
  maxVolts: number;
  /** Amps of one count of the current channel: the smallest step the rig can tell apart. */
  ampsPerCount: number;
  /** Implausible frames held this long (and `endFrames` in a row) end the run. @default 2000 */
  implausibleEndMs?: number;
  /** @default 5 */
  endFrames?: number;
  /** No current with the load on this long raises the open-load alarm. @default 3000 */
  openLoadAlarmMs?: number;
  /** ...and this long ends the run. @default 10000 */
  openLoadEndMs?: number;
}

/** The plausibility limits of a chemistry × cells on a rig, with the defaults above. */
export function plausibilityFor(x: {
  maxRestVPerCell: number;
  cells: number;
  ampsPerCount: number;
}): PlausibilitySettings {
  return {
    maxVolts: x.maxRestVPerCell * x.cells * (1 + VOLTAGE_HEADROOM),
    ampsPerCount: x.ampsPerCount,
  };
}

export interface PlausibilityInput {
  atMs: number;
  volts: number;
  amps: number;
  loadOn: boolean;
}

/** The verdict on one frame; the same object is reused for every call, read it at once. */
export interface PlausibilityOutcome {
  /** False: the frame is not integrated, nor used for the cutoff. */
  plausible: boolean;
  events: { name: string; detail: Record<string, unknown> }[];
  end: { reason: 'implausible_reading' | 'open_load'; detail: string } | null;
}

/**
 * Readings the cell and the rig cannot produce, and a load switched on that draws nothing.
 * Pure: readings and host time in, a verdict, events and an end out. The channel's zero is
 * learnt from the frames with the load off (the precheck gives some before the load goes on).
 */
export class Plausibility {
  /** Frames found implausible so far (not integrated). */
  implausibleFrames = 0;
  private readonly s: Required<PlausibilitySettings>;
  private readonly implausible: Debounce;
  private readonly openAlarm: Debounce;
  private readonly openEnd: Debounce;
  private openAlarmed = false;
  private zeroN = 0;
  private zeroMean = 0;
  private zeroM2 = 0;
  /** The no-current reading and the half-width of its band, kept up to date by `observeOff`. */
  private zeroA = 0;
  private bandA: number;
  private readonly out: PlausibilityOutcome = { plausible: true, events: [], end: null };
  private sinceSummary = 0;
  private summaryAt = -Infinity;

  constructor(settings: PlausibilitySettings) {
    this.s = {
      implausibleEndMs: 2000,
      endFrames: 5,
      openLoadAlarmMs: 3000,
      openLoadEndMs: 10_000,
      ...settings,
    };
    this.implausible = new Debounce(this.s.implausibleEndMs, this.s.endFrames);
    this.openAlarm = new Debounce(this.s.openLoadAlarmMs, 3);
    this.openEnd = new Debounce(this.s.openLoadEndMs, this.s.endFrames);
    this.bandA = ZERO_BAND_COUNTS * this.s.ampsPerCount;
  }

  /** A load-off reading: the current channel's zero (its offset) and how much it wanders. */
  observeOff(amps: number): void {
    if (!Number.isFinite(amps)) return;
    this.zeroN++;
    const d = amps - this.zeroMean;
    this.zeroMean += d / this.zeroN;
    this.zeroM2 += d * (amps - this.zeroMean);
    if (this.zeroN < ZERO_MIN_FRAMES) return;
    const sd = Math.sqrt(this.zeroM2 / (this.zeroN - 1));
    this.zeroA = this.zeroMean;
    this.bandA = Math.max(ZERO_BAND_COUNTS * this.s.ampsPerCount, ZERO_BAND_SD * sd);
  }

  /** A frame during the discharge; with the load off it only clears what was building up. */
  check(x: PlausibilityInput): PlausibilityOutcome {
    const out = this.out;
    out.plausible = true;
    if (out.events.length > 0) out.events = [];
    out.end = null;
    if (!x.loadOn) {
      this.implausible.reset();
      this.resetOpen();
      return out;
    }
    const why = this.implausibleWhy(x);
    if (why !== null) {
      out.plausible = false;
      this.implausibleFrames++;
      this.report(x, why, out);
      this.resetOpen();
      if (this.implausible.update(true, x.atMs))
        out.end = {
          reason: 'implausible_reading',
          detail: `implausible_reading: ${why}, held for ${this.s.implausibleEndMs / 1000} s; the readings cannot be trusted`,
        };
      return out;
    }
    this.implausible.reset();
    this.checkOpen(x, out);
    return out;
  }

  private implausibleWhy(x: PlausibilityInput): string | null {
    if (!Number.isFinite(x.volts) || !Number.isFinite(x.amps)) return 'a reading is not a number';
    if (x.volts > this.s.maxVolts)
      return `${x.volts.toFixed(3)} V is above ${this.s.maxVolts.toFixed(3)} V, more than the chemistry × cells can show`;
    if (x.amps < this.zeroA - this.bandA)
      return `${x.amps.toFixed(4)} A flows into the cell with the load on (no current reads ${this.zeroA.toFixed(4)} A)`;
    return null;
  }

  /** The first frames in full, then a count at most once a minute. */
  private report(x: PlausibilityInput, why: string, out: PlausibilityOutcome): void {
    const n = this.implausibleFrames;
    if (n <= LISTED_IN_FULL) {
      out.events.push({
        name: 'implausible_reading',
        detail: { volts: x.volts, amps: x.amps, why, count: n, note: 'not integrated' },
      });
      this.summaryAt = x.atMs;
      return;
    }
    this.sinceSummary++;
    if (x.atMs - this.summaryAt >= SUMMARY_EVERY_MS) {
      out.events.push({
        name: 'implausible_summary',
        detail: { since_last: this.sinceSummary, count: n, last_why: why },
      });
      this.sinceSummary = 0;
      this.summaryAt = x.atMs;
    }
  }

  private checkOpen(x: PlausibilityInput, out: PlausibilityOutcome): void {
    const none = Math.abs(x.amps - this.zeroA) <= this.bandA;
    if (!none) {
      this.resetOpen();
      return;
    }
    if (this.openAlarm.update(true, x.atMs) && !this.openAlarmed) {
      this.openAlarmed = true;
      out.events.push({
        name: 'open_load',
        detail: {
          amps: x.amps,
          no_current_A: this.zeroA,
          band_A: this.bandA,
          note: 'the load is on but no current flows: a blown fuse, an open load resistor or a broken sense wire',
        },
      });
    }
    if (this.openEnd.update(true, x.atMs))
      out.end = {
        reason: 'open_load',
        detail: `open_load: the load has been on for ${this.s.openLoadEndMs / 1000} s with no current (${x.amps.toFixed(4)} A, no current reads ${this.zeroA.toFixed(4)} ± ${this.bandA.toFixed(4)} A); check the fuse, the load resistor and the sense wiring`,
      };
  }

  private resetOpen(): void {
    this.openAlarm.reset();
    this.openEnd.reset();
    this.openAlarmed = false;
  }
}
