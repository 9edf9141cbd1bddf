/**
 * The averaging behind a calibration point: raw counts of the rig's three channels over a
 * window of decoded frames, with their spread and the standard error of the mean. Pure: frames
 * and their arrival times in, statistics out.
 */
import { FLAG_LOAD_ON, FLAG_RIG_FAULT, type DataFrame } from '../protocol/messages.js';
import type { Quantity } from './calibration.js';

export interface CountStats {
  n: number;
  mean: number;
  /** Sample standard deviation (n − 1); 0 for fewer than two counts. */
  sd: number;
  /** Standard error of the mean, sd / √n. */
  se: number;
  min: number;
  max: number;
}

/** Running mean and spread (Welford's update): constant memory however long the window. */
export class CountAverager {
  private n = 0;
  private mean = 0;
  private m2 = 0;
  private min = Infinity;
  private max = -Infinity;

  add(x: number): void {
    this.n++;
    const d = x - this.mean;
    this.mean += d / this.n;
    this.m2 += d * (x - this.mean);
    if (x < this.min) this.min = x;
    if (x > this.max) this.max = x;
  }

  get count(): number {
    return this.n;
  }

  stats(): CountStats {
    const sd = this.n > 1 ? Math.sqrt(this.m2 / (this.n - 1)) : 0;
    return {
      n: this.n,
      mean: this.mean,
      sd,
      se: this.n > 0 ? sd / Math.sqrt(this.n) : 0,
      min: this.min,
      max: this.max,
    };
  }
}

/** Below this spread (counts) the noise no longer dithers the ADC's rounding away. */
const DITHER_SD_COUNTS = 0.5;

/**
 * Standard uncertainty of a mean count. With enough noise the rounding averages out and the
 * standard error is the whole story; with less, a steady input sits on one count and the mean
 * can be off by up to half a count whatever n is, so the rectangular ±½ count
 * (u = 1/√12, GUM JCGM 100:2008 4.3.7) is added.
 */
export function meanUncertaintyCounts(s: CountStats): number {
  return s.sd >= DITHER_SD_COUNTS ? s.se : Math.sqrt(s.se * s.se + 1 / 12);
}

export function rawOf(frame: DataFrame, quantity: Quantity): number {
  return quantity === 'voltage' ? frame.vRaw : quantity === 'current' ? frame.iRaw : frame.tRaw;
}

/** What the simulator says was really there at a frame (for `reference: truth`). */
export interface TruthSample {
  voltage: number;
  current: number;
  temperature: number;
}

export interface WindowResult {
  voltage: CountStats;
  current: CountStats;
  temperature: CountStats;
  /** Mean of the truth samples over the same frames, when a truth source was given. */
  truth: TruthSample | null;
  /** Frames of the channel that were left out because the load flag did not match the condition. */
  skipped: number;
  /** Frames that carried the rig-fault flag. */
  faults: number;
}

export interface PointWindowOptions {
  channel: number;
  /** The condition: frames must show the load on (true) or off (false). */
  loadOn: boolean;
  startMs: number;
  endMs: number;
}

/**
 * Collects one point's frames: the right channel, inside [startMs, endMs), with the load flag
 * as the condition says (the first frames after a switch can still show the old state).
 */
export class PointWindow {
  private readonly v = new CountAverager();
  private readonly i = new CountAverager();
  private readonly t = new CountAverager();
  private readonly truthSum: TruthSample = { voltage: 0, current: 0, temperature: 0 };
  private truthN = 0;
  private skipped = 0;
  private faults = 0;

  constructor(private readonly o: PointWindowOptions) {}

  /** Offers a frame that arrived at `atMs`; returns whether it was averaged. */
  offer(frame: DataFrame, atMs: number, truth?: TruthSample): boolean {
    if (frame.channel !== this.o.channel || atMs < this.o.startMs || atMs >= this.o.endMs)
      return false;
    if ((frame.flags & FLAG_RIG_FAULT) !== 0) this.faults++;
    if (((frame.flags & FLAG_LOAD_ON) !== 0) !== this.o.loadOn) {
      this.skipped++;
      return false;
    }
    this.v.add(frame.vRaw);
    this.i.add(frame.iRaw);
    this.t.add(frame.tRaw);
    if (truth) {
      this.truthSum.voltage += truth.voltage;
      this.truthSum.current += truth.current;
      this.truthSum.temperature += truth.temperature;
      this.truthN++;
    }
    return true;
  }

  get frames(): number {
    return this.v.count;
  }

  result(): WindowResult {
    const n = this.truthN;
    return {
      voltage: this.v.stats(),
      current: this.i.stats(),
      temperature: this.t.stats(),
      truth:
        n > 0
          ? {
              voltage: this.truthSum.voltage / n,
              current: this.truthSum.current / n,
              temperature: this.truthSum.temperature / n,
            }
          : null,
      skipped: this.skipped,
      faults: this.faults,
    };
  }
}
