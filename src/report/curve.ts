/**
 * The run's curves kept in bounded memory for plotting: consecutive samples are gathered into
 * buckets of equal sample count; when the buckets fill up, neighbours merge in pairs and the
 * count per bucket doubles. Each bucket keeps its extremes, so short pulses still show.
 */
export interface CurvePoint {
  hostS: number;
  chargeAh: number;
  energyWh: number;
  volts: number;
  amps: number;
  /** NaN when the thermistor could not be read. */
  celsius: number;
  loadOn: boolean;
}

export interface CurveBucket {
  t0: number;
  t1: number;
  q0: number;
  q1: number;
  e1: number;
  n: number;
  /** Frames with the load on. */
  nOn: number;
  vMin: number;
  vMax: number;
  vSum: number;
  /** Sum of the loaded voltages only. */
  vOnSum: number;
  iMin: number;
  iMax: number;
  iSum: number;
  tempSum: number;
  tempN: number;
}

function bucketOf(p: CurvePoint): CurveBucket {
  const temp = Number.isFinite(p.celsius);
  return {
    t0: p.hostS,
    t1: p.hostS,
    q0: p.chargeAh,
    q1: p.chargeAh,
    e1: p.energyWh,
    n: 1,
    nOn: p.loadOn ? 1 : 0,
    vMin: p.volts,
    vMax: p.volts,
    vSum: p.volts,
    vOnSum: p.loadOn ? p.volts : 0,
    iMin: p.amps,
    iMax: p.amps,
    iSum: p.amps,
    tempSum: temp ? p.celsius : 0,
    tempN: temp ? 1 : 0,
  };
}

function merge(a: CurveBucket, b: CurveBucket): CurveBucket {
  return {
    t0: a.t0,
    t1: b.t1,
    q0: a.q0,
    q1: b.q1,
    e1: b.e1,
    n: a.n + b.n,
    nOn: a.nOn + b.nOn,
    vMin: Math.min(a.vMin, b.vMin),
    vMax: Math.max(a.vMax, b.vMax),
    vSum: a.vSum + b.vSum,
    vOnSum: a.vOnSum + b.vOnSum,
    iMin: Math.min(a.iMin, b.iMin),
    iMax: Math.max(a.iMax, b.iMax),
    iSum: a.iSum + b.iSum,
    tempSum: a.tempSum + b.tempSum,
    tempN: a.tempN + b.tempN,
  };
}

/** Adds a point to the open bucket in place: the same as merge(b, bucketOf(p)), without two objects per row. */
function absorb(b: CurveBucket, p: CurvePoint): void {
  const temp = Number.isFinite(p.celsius);
  b.t1 = p.hostS;
  b.q1 = p.chargeAh;
  b.e1 = p.energyWh;
  b.n += 1;
  if (p.loadOn) {
    b.nOn += 1;
    b.vOnSum += p.volts;
  }
  b.vMin = Math.min(b.vMin, p.volts);
  b.vMax = Math.max(b.vMax, p.volts);
  b.vSum += p.volts;
  b.iMin = Math.min(b.iMin, p.amps);
  b.iMax = Math.max(b.iMax, p.amps);
  b.iSum += p.amps;
  if (temp) {
    b.tempSum += p.celsius;
    b.tempN += 1;
  }
}

export class CurveBuilder {
  private list: CurveBucket[] = [];
  private stride = 1;

  /** @param maxBuckets at most this many buckets are kept (between half and all of it at the end). */
  constructor(private readonly maxBuckets = 1024) {}

  /** One point; `p` is read, not kept, so a caller may pass the same object every time. */
  add(p: Readonly<CurvePoint>): void {
    const last = this.list[this.list.length - 1];
    if (last !== undefined && last.n < this.stride) {
      absorb(last, p);
      return;
    }
    if (this.list.length >= this.maxBuckets) {
      const merged: CurveBucket[] = [];
      for (let i = 0; i < this.list.length; i += 2) {
        const b = this.list[i + 1];
        merged.push(b ? merge(this.list[i]!, b) : this.list[i]!);
      }
      this.list = merged;
      this.stride *= 2;
      this.add(p);
      return;
    }
    this.list.push(bucketOf(p));
  }

  get buckets(): readonly CurveBucket[] {
    return this.list;
  }
}

/** Loaded voltage at a given charge, interpolated between bucket centres; null without loaded buckets. */
export function loadedVoltageAtCharge(
  buckets: readonly CurveBucket[],
  chargeAh: number,
): number | null {
  const pts = buckets
    .filter((b) => b.nOn > 0)
    .map((b) => ({ q: (b.q0 + b.q1) / 2, v: b.vOnSum / b.nOn }));
  if (pts.length === 0) return null;
  if (chargeAh <= pts[0]!.q) return pts[0]!.v;
  for (let i = 1; i < pts.length; i++) {
    const a = pts[i - 1]!;
    const b = pts[i]!;
    if (chargeAh <= b.q)
      return b.q === a.q ? b.v : a.v + ((b.v - a.v) * (chargeAh - a.q)) / (b.q - a.q);
  }
  return pts.at(-1)!.v;
}
