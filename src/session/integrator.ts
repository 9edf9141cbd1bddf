const MS_PER_HOUR = 3_600_000;

/**
 * The load's switches as the integral placed them, for the uncertainty budget. Each fell
 * somewhere in a window the host knows: between the last frame in the old state and the first in
 * the new, or between the last frame with the load on and the rig's acknowledgement of the
 * switch-off that ended the run. The charge near it is known to within a half-width a = the
 * current at the switch × the part of the window the integral may be wrong by: half of it where
 * the trapezoid put the switch in the middle, all of it where the integral stops (or skips a long
 * gap) at one end. Summed as squares: switches are independent of one another.
 */
export interface SwitchWindows {
  count: number;
  /** Σ a², Ah², over the switches. */
  sumSqHalfWidthAh: number;
  /** The widest window, ms. */
  widestMs: number;
}

/**
 * From the last frame seen with the load on to the moment a rig that hears no more heartbeats
 * cuts it: its watchdog runs 5 s from the last heartbeat it heard, and heartbeats go out every
 * 0.5 s, so the last one it heard left up to 0.5 s before that frame or just after it. The
 * middle of that range, 4.75 s (± 0.25 s); the bridged charge counts in full as doubt anyway.
 */
export const WATCHDOG_CUT_AFTER_MS = 5000 - 250;

/** Charge bridged from the last frame with the load on to the rig's estimated watchdog cut. */
export interface CutBridge {
  ms: number;
  chargeAh: number;
}

/**
 * Trapezoidal charge and energy on host time. The current counts only while the load is
 * switched on: with the load off no current flows, whatever an uncorrected offset shows.
 */
export class Integrator {
  chargeAh = 0;
  energyWh = 0;
  /** Time the load was on, ms. */
  onMs = 0;
  /** Charge carried across flagged gaps (a figure of doubt, reported with the uncertainty). */
  bridgedAh = 0;
  /** Where the load switched, as far as the frames tell (for the uncertainty budget). */
  readonly switches: SwitchWindows = { count: 0, sumSqHalfWidthAh: 0, widestMs: 0 };
  // The frame before, as fields rather than an object per frame.
  private hasPrev = false;
  private prevI = 0;
  private prevP = 0;
  private prevOn = false;
  /** What the last `add` or `bridgeToCut` bridged to a watchdog cut. */
  cut: CutBridge = { ms: 0, chargeAh: 0 };

  /**
   * One frame after the one before. Returns true when the frame ends a long gap that began
   * with the load on and ends with it off (the rig's watchdog cut it while the link was away):
   * the charge to the estimated cut is then bridged at the last current, in `cut`.
   */
  add(dtMs: number, volts: number, amps: number, loadOn: boolean, gap: boolean): boolean {
    const i = loadOn ? amps : 0;
    const p = loadOn ? volts * amps : 0;
    const had = this.hasPrev;
    const prevI = this.prevI;
    const prevP = this.prevP;
    const prevOn = this.prevOn;
    this.hasPrev = true;
    this.prevI = i;
    this.prevP = p;
    this.prevOn = loadOn;
    if (!had || dtMs <= 0) return false;
    // Across a long gap only a load seen on at both ends is assumed to have stayed on. One seen
    // on before and off after kept drawing until it was cut: by the rig's watchdog at the latest
    // (bridged, all of it doubt, which covers when it switched). One seen off before and on
    // after was switched on somewhere in the gap: the integral may be wrong by the whole gap.
    if (gap && !(loadOn && prevOn)) {
      if (loadOn) this.switchIn(dtMs, i, 1);
      if (!prevOn) return false;
      this.bridge(prevI, prevP, Math.min(dtMs, WATCHDOG_CUT_AFTER_MS));
      return true;
    }
    // The trapezoid puts a switch in the middle of its step (half-width: half the step).
    if (loadOn !== prevOn) this.switchIn(dtMs, loadOn ? i : prevI, 0.5);
    const dAh = ((prevI + i) / 2) * (dtMs / MS_PER_HOUR);
    this.chargeAh += dAh;
    this.energyWh += ((prevP + p) / 2) * (dtMs / MS_PER_HOUR);
    // The trapezoid of the on/off indicator: a step in which the load switched counts half.
    this.onMs += (((loadOn ? 1 : 0) + (prevOn ? 1 : 0)) / 2) * dtMs;
    if (gap) this.bridgedAh += Math.abs(dAh);
    return false;
  }

  /**
   * The link gone for good with the load on at the last frame: the charge until the rig's
   * watchdog cut it, bridged at the last current; the load counts as off from then. Null when
   * the load was off at the last frame.
   */
  bridgeToCut(): CutBridge | null {
    if (!this.hasPrev || !this.prevOn) return null;
    this.bridge(this.prevI, this.prevP, WATCHDOG_CUT_AFTER_MS);
    this.prevOn = false;
    this.prevI = 0;
    this.prevP = 0;
    return this.cut;
  }

  private bridge(amps: number, watts: number, ms: number): void {
    const dAh = amps * (ms / MS_PER_HOUR);
    this.chargeAh += dAh;
    this.energyWh += watts * (ms / MS_PER_HOUR);
    this.onMs += ms;
    this.bridgedAh += Math.abs(dAh);
    this.cut = { ms, chargeAh: dAh };
  }

  /**
   * The load went off after the last frame, which showed it on, and before `windowMs` had passed
   * (the rig's acknowledgement came): the integral stops at that frame, so the charge of up to
   * the whole window is not in it.
   */
  offAfterLast(windowMs: number): void {
    if (this.hasPrev && this.prevOn && windowMs > 0) this.switchIn(windowMs, this.prevI, 1);
  }

  private switchIn(windowMs: number, amps: number, part: number): void {
    const s = this.switches;
    const a = Math.abs(amps) * ((part * windowMs) / MS_PER_HOUR);
    s.count++;
    s.sumSqHalfWidthAh += a * a;
    s.widestMs = Math.max(s.widestMs, windowMs);
  }

  /**
   * A frame whose readings cannot be true: its time is bridged at the last trusted reading,
   * counted in full as doubt; the reading itself is never integrated, and the next frame
   * integrates from the last trusted one.
   */
  hold(dtMs: number, loadOn: boolean): void {
    if (!this.hasPrev || dtMs <= 0 || !(loadOn && this.prevOn)) return;
    const dAh = this.prevI * (dtMs / MS_PER_HOUR);
    this.chargeAh += dAh;
    this.energyWh += this.prevP * (dtMs / MS_PER_HOUR);
    this.onMs += dtMs;
    this.bridgedAh += Math.abs(dAh);
  }

  /**
   * Charge that flowed while nobody was logging (the daemon down, the rig's load still on),
   * estimated by the caller; counted in the totals and, in full, as doubt.
   */
  addUnlogged(dtMs: number, volts: number, amps: number): void {
    const dAh = amps * (dtMs / MS_PER_HOUR);
    this.chargeAh += dAh;
    this.energyWh += volts * amps * (dtMs / MS_PER_HOUR);
    this.onMs += dtMs;
    this.bridgedAh += Math.abs(dAh);
  }

  /**
   * A program's next segment: its totals start from zero, and the frame that ended the segment
   * before stays the first point of this one (the trapezoid from it is this segment's).
   */
  zeroTotals(): void {
    this.chargeAh = 0;
    this.energyWh = 0;
    this.onMs = 0;
    this.bridgedAh = 0;
    this.switches.count = 0;
    this.switches.sumSqHalfWidthAh = 0;
    this.switches.widestMs = 0;
  }

  /** Starts from totals recorded earlier (resuming a run); the next frame starts a new segment. */
  restore(totals: { chargeAh: number; energyWh: number; onMs: number; bridgedAh: number }): void {
    this.chargeAh = totals.chargeAh;
    this.energyWh = totals.energyWh;
    this.onMs = totals.onMs;
    this.bridgedAh = totals.bridgedAh;
    this.hasPrev = false;
  }
}
