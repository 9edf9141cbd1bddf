/** Unwraps a counter that wraps at `modulus` into a monotonically growing number. */
export class Unwrapper {
  private last: number | null = null;
  private base = 0;

  constructor(private readonly modulus: number) {}

  /** Returns the unwrapped value and the step from the previous one (null for the first). */
  next(raw: number): { value: number; step: number | null } {
    if (this.last === null) {
      this.last = raw;
      return { value: raw, step: null };
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
    return { value: this.base + raw, step };
  }

  reset(): void {
    this.last = null;
    this.base = 0;
  }
}
