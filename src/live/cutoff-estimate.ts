/**
 * Time to cutoff from the recent voltage slope: a least-squares line through the loaded
 * voltage over the last `windowS` seconds, extrapolated to the cutoff. Linear extrapolation
 * overestimates on a flat plateau and tightens as the knee of the curve arrives, which is the
 * part of a run where the figure matters.
 */
export interface CutoffEstimateOptions {
  /** Seconds of recent loaded samples the slope is fitted over. @default 300 */
  windowS?: number;
  /** Points kept in the window, spaced evenly in time; bounds memory at any sample rate. @default 240 */
  maxPoints?: number;
  /** No estimate until the window spans this many seconds. @default 30 */
  minSpanS?: number;
}

export interface CutoffEstimate {
  time_to_cutoff_s: number | null;
  slope_V_per_s: number | null;
}

export class CutoffEstimator {
  private readonly windowS: number;
  private readonly maxPoints: number;
  private readonly minSpanS: number;
  private t: number[] = [];
  private v: number[] = [];
  /** The fit of the points in the window; samples closer than the spacing do not change it. */
  private line: { slope: number; intercept: number } | null | undefined;

  constructor(o: CutoffEstimateOptions = {}) {
    this.windowS = o.windowS ?? 300;
    this.maxPoints = o.maxPoints ?? 240;
    this.minSpanS = o.minSpanS ?? 30;
  }

  /** Adds a loaded sample; an unloaded one (rest, end) clears the window, as its voltage recovers. */
  add(hostS: number, volts: number, loadOn: boolean): void {
    if (!loadOn || !Number.isFinite(volts) || !Number.isFinite(hostS)) {
      this.reset();
      return;
    }
    const last = this.t[this.t.length - 1];
    if (last !== undefined && hostS < last) this.reset();
    else if (last !== undefined && hostS - last < this.windowS / this.maxPoints) return;
    this.t.push(hostS);
    this.v.push(volts);
    this.line = undefined;
    let drop = 0;
    while (drop < this.t.length - 2 && hostS - this.t[drop]! > this.windowS) drop++;
    if (drop > 0) {
      this.t.splice(0, drop);
      this.v.splice(0, drop);
    }
  }

  reset(): void {
    this.t = [];
    this.v = [];
    this.line = undefined;
  }

  get points(): number {
    return this.t.length;
  }

  /** Ordinary least-squares line of volts on seconds, or null with fewer than 3 points. */
  fit(): { slope: number; intercept: number } | null {
    if (this.line === undefined) this.line = this.leastSquares();
    return this.line;
  }

  private leastSquares(): { slope: number; intercept: number } | null {
    const n = this.t.length;
    if (n < 3) return null;
    let mt = 0;
    let mv = 0;
    for (let i = 0; i < n; i++) {
      mt += this.t[i]!;
      mv += this.v[i]!;
    }
    mt /= n;
    mv /= n;
    let stt = 0;
    let stv = 0;
    for (let i = 0; i < n; i++) {
      const dt = this.t[i]! - mt;
      stt += dt * dt;
      stv += dt * (this.v[i]! - mv);
    }
    if (stt <= 0) return null;
    const slope = stv / stt;
    return { slope, intercept: mv - slope * mt };
  }

  /**
   * Seconds from the newest point until the fitted line reaches `cutoffV`. The line's value
   * at the newest point is used rather than the raw reading, so ADC noise does not jitter it.
   */
  estimate(cutoffV: number | null): CutoffEstimate {
    const line = this.fit();
    if (line === null) return { time_to_cutoff_s: null, slope_V_per_s: null };
    const first = this.t[0]!;
    const newest = this.t[this.t.length - 1]!;
    if (cutoffV === null || newest - first < this.minSpanS || line.slope >= 0)
      return { time_to_cutoff_s: null, slope_V_per_s: line.slope };
    const above = line.intercept + line.slope * newest - cutoffV;
    return { time_to_cutoff_s: above <= 0 ? 0 : above / -line.slope, slope_V_per_s: line.slope };
  }
}
