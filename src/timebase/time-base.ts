import { RateEstimator } from './rate-estimator.js';
import { Unwrapper } from './unwrap.js';

/**
 * A frame that arrives sooner after the one before than this fraction of their tick spacing
 * came in the same delivery (a USB bridge's clump, a buffer read at once): the one before was
 * not the last of its clump, so its arrival says nothing about when it was made. Well below
 * the 0.77 a rig clock 30 % fast gives for frames delivered one by one.
 */
const SAME_DELIVERY_FRACTION = 0.25;

/** Baseline of fresh arrivals from which a first rate is used, before the settled estimate. */
const PROVISIONAL_SPAN_MS = 500;
const PROVISIONAL_POINTS = 3;
/** A first rate outside this range of host ms per rig ms is not believed (a rig clock off by 2×). */
const PLAUSIBLE_SCALE = { min: 0.5, max: 2 };

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

interface Seen {
  hostMs: number;
  tick: number;
  arrival: number;
}

/**
 * Places each frame on the host's monotonic clock. The integral spans host time only. The last
 * frame of each delivery is taken to arrive when it was made (an anchor); the frames after it
 * are placed at the anchor's arrival plus their tick distance from it scaled to host time, never
 * later than their own arrival nor more than `maxLagMs` before it, nor before the frame before.
 * Placing from the latest anchor rather than from the frame before keeps an error in the scale
 * (a rig clock 30 % slow before its rate is known) from piling up into a lag that would stretch
 * the load-on time; only the anchors, fresh arrivals, feed the rate estimate, so frames buffered
 * before the port opened, or held in a clump, do not read as a fast rig clock.
 */
export class TimeBase {
  private readonly longGapMs: number;
  private readonly maxLagMs: number;
  private readonly ticks = new Unwrapper(2 ** 32);
  private readonly seqs = new Unwrapper(65536);
  private readonly rate = new RateEstimator();
  private prev: Seen | null = null;
  private anchor: Seen | null = null;

  constructor(options: TimeBaseOptions = {}) {
    this.longGapMs = options.longGapMs ?? 2000;
    this.maxLagMs = options.maxLagMs ?? 1000;
  }

  /**
   * The frame's stamp, written into `out` when given (a caller stamping a frame at a time reuses
   * one object), else into a new one.
   */
  stamp(seq: number, tickMs: number, arrivalMs: number, out?: Stamp): Stamp {
    const tick = this.ticks.next(tickMs);
    const tickStep = this.ticks.step;
    this.seqs.next(seq);
    const seqStep = this.seqs.step;
    const prev = this.prev;
    const rigRestart = tickStep !== null && tickStep < 0;
    if (prev === null || rigRestart)
      return this.restart(prev, seq, tickMs, tick, arrivalMs, rigRestart, out);
    // Ticks that ran on while the host stood still (suspended) would wreck the rate estimate.
    const scale = this.scale();
    const hostStood = (tick - prev.tick) * scale - (arrivalMs - prev.arrival) > this.longGapMs;
    if (hostStood) {
      this.rate.reset();
      this.anchor = null;
    } else if (arrivalMs - prev.arrival >= SAME_DELIVERY_FRACTION * (tick - prev.tick) * scale) {
      // The frame before ended its delivery: its arrival is as fresh as any. The anchor and the
      // frame before are updated in place: a frame at a time, millions in a recompute.
      this.setAnchor(prev.arrival, prev.tick);
      this.rate.add(prev.tick, prev.arrival);
    }
    const from = this.anchor ?? prev;
    const predicted = from.hostMs + (tick - from.tick) * this.scale();
    const lower = Math.max(prev.hostMs, arrivalMs - this.maxLagMs);
    const hostMs = Math.min(arrivalMs, Math.max(lower, predicted));
    const prevHostMs = prev.hostMs;
    // A long silence on the host's clock, or the rig's ticks showing far more time than the
    // host saw: the monotonic clock stands still while the host is suspended.
    const gap = arrivalMs - prev.arrival > this.longGapMs || hostStood;
    prev.hostMs = hostMs;
    prev.tick = tick;
    prev.arrival = arrivalMs;
    return fill(out, hostMs, hostMs - prevHostMs, Math.max(0, (seqStep ?? 1) - 1), gap, false);
  }

  private setAnchor(at: number, tick: number): void {
    const a = this.anchor;
    if (a === null) this.anchor = { hostMs: at, tick, arrival: at };
    else {
      a.hostMs = at;
      a.tick = tick;
      a.arrival = at;
    }
  }

  rigClockErrorPpm(): number | null {
    return this.rate.errorPpm();
  }

  /** Host ms per rig ms: the settled estimate, else a first one from a short baseline, else 1. */
  private scale(): number {
    const settled = this.rate.hostPerTick();
    if (settled !== null) return settled;
    const first = this.rate.hostPerTick(PROVISIONAL_SPAN_MS, PROVISIONAL_POINTS);
    return first !== null && first >= PLAUSIBLE_SCALE.min && first <= PLAUSIBLE_SCALE.max
      ? first
      : 1;
  }

  /** The first frame, or the first after the rig restarted: stamped at its arrival. */
  private restart(
    prev: Seen | null,
    seq: number,
    tickMs: number,
    tick: number,
    arrivalMs: number,
    rigRestart: boolean,
    out: Stamp | undefined,
  ): Stamp {
    if (rigRestart) {
      this.ticks.reset();
      this.seqs.reset();
      this.ticks.next(tickMs);
      this.seqs.next(seq);
      this.rate.reset();
    }
    const hostMs = prev === null ? arrivalMs : Math.max(prev.hostMs, arrivalMs);
    this.anchor = null;
    this.prev = { hostMs, tick: rigRestart ? tickMs : tick, arrival: arrivalMs };
    return fill(
      out,
      hostMs,
      prev === null ? 0 : hostMs - prev.hostMs,
      0,
      prev !== null,
      rigRestart,
    );
  }
}

/** The stamp's fields written into `out`, or a new stamp without one. */
function fill(
  out: Stamp | undefined,
  hostMs: number,
  dtMs: number,
  lost: number,
  gap: boolean,
  rigRestart: boolean,
): Stamp {
  if (out === undefined) return { hostMs, dtMs, lost, gap, rigRestart };
  out.hostMs = hostMs;
  out.dtMs = dtMs;
  out.lost = lost;
  out.gap = gap;
  out.rigRestart = rigRestart;
  return out;
}
