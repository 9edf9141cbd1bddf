/**
 * The rig's millisecond tick counter. Its oscillator runs fast or slow by a fixed rate error
 * (+0.20 = 20 % fast) and the counter wraps at 2^32, as a 32-bit firmware counter does.
 */
const WRAP = 2 ** 32;

export class RigTickCounter {
  constructor(
    readonly rateError: number,
    private readonly startTick = 0,
  ) {
    if (!(rateError > -1))
      throw new RangeError(`rig clock rate error must be above -1, got ${rateError}`);
  }

  /** The tick the rig shows after `trueElapsedMs` of true time since boot. */
  ticksAt(trueElapsedMs: number): number {
    return Math.floor(this.startTick + trueElapsedMs * (1 + this.rateError)) % WRAP;
  }

  /** True milliseconds the rig takes to count `rigMs` of its own. */
  trueMsFor(rigMs: number): number {
    return rigMs / (1 + this.rateError);
  }
}
