/**
 * The run's curves kept in bounded memory for plotting: consecutive samples are gathered into
 * buckets of up to a stride of samples; when the buckets fill up, neighbours merge in pairs and
 * the stride doubles. Where the drawn voltage moves (the knee at the end of a discharge) buckets
 * close early and are kept apart, so the bend is drawn finely. Each bucket keeps its extremes,
 * so short pulses still show.
 */
import quickselect from 'quickselect';

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

/** Merges `b`, the bucket after `a`, into `a`. */
function mergeInto(a: CurveBucket, b: CurveBucket): void {
  a.t1 = b.t1;
  a.q1 = b.q1;
  a.e1 = b.e1;
  a.n += b.n;
  a.nOn += b.nOn;
  a.vMin = Math.min(a.vMin, b.vMin);
  a.vMax = Math.max(a.vMax, b.vMax);
  a.vSum += b.vSum;
  a.vOnSum += b.vOnSum;
  a.iMin = Math.min(a.iMin, b.iMin);
  a.iMax = Math.max(a.iMax, b.iMax);
  a.iSum += b.iSum;
  a.tempSum += b.tempSum;
  a.tempN += b.tempN;
}

/** Adds a point to the open bucket in place: the same as mergeInto(b, bucketOf(p)), without an object per row. */
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

/** A bucket's voltage as its line is drawn: the loaded mean where it has loaded frames. */
function drawnVoltage(b: CurveBucket): number {
  return b.nOn > 0 ? b.vOnSum / b.nOn : b.vSum / b.n;
}

/**
 * The knee of a discharge comes last and falls fast: an open bucket also closes once its drawn
 * voltage has moved more than 1/FINE_STEPS of the run's voltage range so far from the bucket's
 * before it, so the fall is drawn in steps of about that size however long the run was. The
 * drawn voltage is a mean: a reading's noise moves it little, where the spread of the readings
 * themselves would close a bucket every few frames on a noisy rig.
 */
const FINE_STEPS = 100;

/**
 * The fine step is never under this many times the readings' noise: early in a run, while the
 * range is a few millivolts, a coarse ADC's wobble would otherwise read as a bend everywhere.
 */
const NOISE_FLOOR = 3;
/** Frames the noise is averaged over (an exponential weighting). */
const NOISE_FRAMES = 1024;

/**
 * A bucket closes early only once it holds this share of the stride. Without a floor a noisy
 * start (the range still small) makes buckets of a frame or two, thinned hundreds of times, and
 * each thinning doubles the stride: the rest of the run came out in a few coarse buckets.
 */
const EARLY_SHARE = 1 / 16;

/**
 * Of the neighbour pairs, the share with the largest voltage change that a thinning may keep
 * apart; only a change over the fine step is kept (a smaller one is noise or a slow slope).
 */
const KEEP_APART = 0.25;

export class CurveBuilder {
  private list: CurveBucket[] = [];
  private stride = 1;
  private vLo = Infinity;
  private vHi = -Infinity;
  /** Mean step between consecutive readings, recent ones weighted most: the readings' noise. */
  private noise = 0;
  private lastV = Number.NaN;

  /** @param maxBuckets at most this many buckets are kept (between half and all of it at the end). */
  constructor(private readonly maxBuckets = 1024) {}

  /** One point; `p` is read, not kept, so a caller may pass the same object every time. */
  add(p: Readonly<CurvePoint>): void {
    this.vLo = Math.min(this.vLo, p.volts);
    this.vHi = Math.max(this.vHi, p.volts);
    const step = Math.abs(p.volts - this.lastV);
    if (Number.isFinite(step)) this.noise += (step - this.noise) / NOISE_FRAMES;
    this.lastV = p.volts;
    const last = this.list[this.list.length - 1];
    if (
      last !== undefined &&
      last.n < this.stride &&
      (last.n < this.stride * EARLY_SHARE || !this.departs(last))
    ) {
      absorb(last, p);
      return;
    }
    if (this.list.length >= this.maxBuckets) {
      this.thin();
      this.add(p);
      return;
    }
    this.list.push(bucketOf(p));
  }

  get buckets(): readonly CurveBucket[] {
    return this.list;
  }

  private get fine(): number {
    return Math.max((this.vHi - this.vLo) / FINE_STEPS, NOISE_FLOOR * this.noise);
  }

  /** Whether the open bucket's drawn voltage has moved a fine step from the bucket before it. */
  private departs(b: CurveBucket): boolean {
    const before = this.list[this.list.length - 2];
    return before !== undefined && Math.abs(drawnVoltage(b) - drawnVoltage(before)) > this.fine;
  }

  /**
   * Merges neighbours in pairs, but for the pairs across which the drawn voltage changes most,
   * by more than a fine step (the knee, a step of the load): those stay apart, so the curve
   * stays fine where it bends.
   * The stride doubles, so memory stays bounded however long the run.
   */
  private thin(): void {
    const list = this.list;
    const pairs = Math.floor(list.length / 2);
    const change = new Float64Array(pairs);
    for (let k = 0; k < pairs; k++)
      change[k] = Math.abs(drawnVoltage(list[2 * k + 1]!) - drawnVoltage(list[2 * k]!));
    // All but the KEEP_APART share of pairs with most change merge.
    const merging = leastChange(change, Math.ceil(pairs * (1 - KEEP_APART)));
    const fine = this.fine;
    for (let k = 0; k < pairs; k++) if (!(change[k]! > fine)) merging[k] = 1;
    // In place: each merged pair becomes its first bucket, and the list closes up behind.
    let w = 0;
    for (let i = 0; i < list.length; i += 2) {
      const a = list[i]!;
      const b = list[i + 1];
      const merges = b !== undefined && merging[i >> 1] === 1;
      if (merges) mergeInto(a, b);
      list[w++] = a;
      if (b !== undefined && !merges) list[w++] = b;
    }
    list.length = w;
    this.stride *= 2;
  }
}

/**
 * The `count` pairs with the least change, marked 1: the first `count` of the pairs sorted by
 * change, equal changes in their own order. A run with noisy readings thins hundreds of times,
 * so rather than sorting the pairs, the change the last one taken reaches is selected (in linear
 * time, by quickselect) and the pairs are marked against it.
 */
function leastChange(change: Float64Array, count: number): Uint8Array {
  const merging = new Uint8Array(change.length);
  if (count <= 0) return merging;
  if (!allFinite(change)) {
    // NaN and infinities do not subtract into an order: as a comparison sort leaves them.
    const order = Array.from({ length: change.length }, (_, k) => k).sort(
      (x, y) => change[x]! - change[y]!,
    );
    for (let j = 0; j < count; j++) merging[order[j]!] = 1;
    return merging;
  }
  const ordered = Array.from(change);
  quickselect(ordered, count - 1);
  const bar = ordered[count - 1]!;
  let atBar = count;
  for (let k = 0; k < change.length; k++) if (change[k]! < bar) atBar--;
  for (let k = 0; k < change.length; k++) {
    const c = change[k]!;
    if (c < bar || (c === bar && atBar-- > 0)) merging[k] = 1;
  }
  return merging;
}

function allFinite(xs: Float64Array): boolean {
  for (let k = 0; k < xs.length; k++) if (!Number.isFinite(xs[k]!)) return false;
  return true;
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
