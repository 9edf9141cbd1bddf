import { RateEstimator } from './rate-estimator.js';
import { Unwrapper } from './unwrap.js';

/** Span over which a lag common to all frames is looked for. */
const LAG_WINDOW_MS = 2000;

export interface TimeBaseOptions {
  /** Host gap between frames that is flagged as a gap rather than bridged quietly. @default 2000 */
  longGapMs?: number;
  /** How far a frame's time may be placed before its arrival (burst spreading). @default 1000 */
  maxLagMs?: number;
}

export interface Stamp {
  /** Host monotonic ms used for integration. */
  hostMs: number;
  /** ms since the previous stamped frame (0 for the first). */
  dtMs: number;
  /** Frames missing before this one, from the sequence number. */
  lost: number;
  /** True when dtMs is a long gap (link stall, host suspend, rig restart). */
  gap: boolean;
  /** True when the rig's counters went backwards: it restarted. */
  rigRestart: boolean;
}

/**
 * Places each frame on the host's monotonic clock. The integral spans host time only; within
 * a burst (several frames delivered together) the frames are spread back by their tick
 * spacing scaled to host time, and never placed later than their arrival or more than
 * `maxLagMs` before it.
 */
export class TimeBase {
  private readonly longGapMs: number;
  private readonly maxLagMs: number;
  private readonly ticks = new Unwrapper(2 ** 32);
  private readonly seqs = new Unwrapper(65536);
  private readonly rate = new RateEstimator();
  private prev: { hostMs: number; tick: number; arrival: number } | null = null;
  private windowStart = -Infinity;
  private windowMinLag = Infinity;

  constructor(options: TimeBaseOptions = {}) {
    this.longGapMs = options.longGapMs ?? 2000;
    this.maxLagMs = options.maxLagMs ?? 1000;
  }

  stamp(seq: number, tickMs: number, arrivalMs: number): Stamp {
    const tick = this.ticks.next(tickMs);
    const tickStep = this.ticks.step;
    this.seqs.next(seq);
    const seqStep = this.seqs.step;
    const prev = this.prev;
    const rigRestart = tickStep !== null && tickStep < 0;
    if (prev === null || rigRestart) {
      if (rigRestart) {
        this.ticks.reset();
        this.seqs.reset();
        this.ticks.next(tickMs);
        this.seqs.next(seq);
        this.rate.reset();
      }
      const hostMs = prev === null ? arrivalMs : Math.max(prev.hostMs, arrivalMs);
      this.windowStart = arrivalMs;
      this.windowMinLag = Infinity;
      this.prev = { hostMs, tick: rigRestart ? tickMs : tick, arrival: arrivalMs };
      this.rate.add(rigRestart ? tickMs : tick, arrivalMs);
      return {
        hostMs,
        dtMs: prev === null ? 0 : hostMs - prev.hostMs,
        lost: 0,
        gap: prev !== null,
        rigRestart,
      };
    }
    // Ticks that ran on while the host stood still (suspended) would wreck the rate estimate.
    const hostStood =
      (tick - prev.tick) * (this.rate.hostPerTick() ?? 1) - (arrivalMs - prev.arrival) >
      this.longGapMs;
    if (hostStood) this.rate.reset();
    this.rate.add(tick, arrivalMs);
    const scale = this.rate.hostPerTick() ?? 1;
    let predicted = prev.hostMs + (tick - prev.tick) * scale;
    // A lag behind arrival that every frame of a window shares (built up before the rate was
    // known, a slow rig clock read as a true one) is removed at once; in bursts the last frame
    // of each burst arrives on time, so their spreading is left alone.
    this.windowMinLag = Math.min(this.windowMinLag, arrivalMs - predicted);
    if (arrivalMs - this.windowStart >= LAG_WINDOW_MS) {
      if (this.windowMinLag > 0) predicted += this.windowMinLag;
      this.windowStart = arrivalMs;
      this.windowMinLag = Infinity;
    }
    const lower = Math.max(prev.hostMs, arrivalMs - this.maxLagMs);
    const hostMs = Math.min(arrivalMs, Math.max(lower, predicted));
    const dtMs = hostMs - prev.hostMs;
    this.prev = { hostMs, tick, arrival: arrivalMs };
    return {
      hostMs,
      dtMs,
      lost: Math.max(0, (seqStep ?? 1) - 1),
      // A long silence on the host's clock, or the rig's ticks showing far more time than the
      // host saw: the monotonic clock stands still while the host is suspended.
      gap: arrivalMs - prev.arrival > this.longGapMs || hostStood,
      rigRestart: false,
    };
  }

  rigClockErrorPpm(): number | null {
    return this.rate.errorPpm();
  }
}
