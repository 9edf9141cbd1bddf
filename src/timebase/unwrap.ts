/** Unwraps a counter that wraps at `modulus` into a monotonically growing number. */
export class Unwrapper {
  private last: number | null = null;
  private base = 0;
  /** The step of the last value from the one before it (null for the first). */
  step: number | null = null;

  constructor(private readonly modulus: number) {}

  /** Returns the unwrapped value; its step from the previous one is in `step`. */
  next(raw: number): number {
    if (this.last === null) {
      this.last = raw;
      this.step = null;
      return raw;
    }
    let step = raw - this.last;
    if (step < -this.modulus / 2) {
      step += this.modulus;
      this.base += this.modulus;
    } else if (step > this.modulus / 2) {
      // A counter stepping back across the wrap (a late frame, a restart): it belongs to the
      // previous lap, and a following forward wrap must land back on this one.
      step -= this.modulus;
      this.base -= this.modulus;
    }
    this.last = raw;
    this.step = step;
    return this.base + raw;
  }

  reset(): void {
    this.last = null;
    this.base = 0;
    this.step = null;
  }
}
