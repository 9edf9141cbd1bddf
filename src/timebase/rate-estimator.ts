/**
 * Least-squares slope of host time against rig ticks, kept as running centred sums
 * (constant memory over a run of any length). Burst delivery adds a latency that repeats with
 * the same distribution all run long, so the slope stays unbiased where a ratio of end points
 * would carry the latency of the last burst.
 */
export class RateEstimator {
  private n = 0;
  private meanTick = 0;
  private meanHost = 0;
  private sTT = 0;
  private sTH = 0;
  private firstHost = 0;
  private lastHost = 0;

  add(tickMs: number, hostMs: number): void {
    if (this.n === 0) this.firstHost = hostMs;
    this.lastHost = hostMs;
    this.n++;
    const dT = tickMs - this.meanTick;
    this.meanTick += dT / this.n;
    this.meanHost += (hostMs - this.meanHost) / this.n;
    this.sTT += dT * (tickMs - this.meanTick);
    this.sTH += dT * (hostMs - this.meanHost);
  }

  /** Host ms per rig ms, or null until the baseline is long enough to mean something. */
  hostPerTick(minSpanMs = 5000, minPoints = 20): number | null {
    if (this.n < minPoints || this.lastHost - this.firstHost < minSpanMs || this.sTT <= 0)
      return null;
    return this.sTH / this.sTT;
  }

  /** Rig clock rate error in parts per million: positive when the rig's clock runs fast. */
  errorPpm(minSpanMs?: number): number | null {
    const s = this.hostPerTick(minSpanMs);
    return s === null ? null : (1 / s - 1) * 1e6;
  }

  reset(): void {
    this.n = 0;
    this.meanTick = this.meanHost = this.sTT = this.sTH = 0;
  }
}
