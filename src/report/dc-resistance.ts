/**
 * DC internal resistance from the run's load steps:
 * - at switch-on, R = (U_open − U_load) / I_load: the resting voltage just before, the first
 *   loaded frame after;
 * - at switch-off, from the recovery: R = (U_recovered − U_load) / I_load, the last loaded
 *   frame before and the first unloaded frame after;
 * - between two load levels (IEC 61951-2, IEC 61960-3): R = (U1 − U2) / (I2 − I1), U1 at the
 *   end of the lower level I1, U2 at the end of the higher level I2 or 1 s into it.
 * The first frame after a step holds the ohmic drop plus whatever polarisation built up within
 * one frame period, so the readings depend a little on the frame rate; the report says so.
 */
export function loadStepResistance(openV: number, loadedV: number, loadA: number): number {
  return (openV - loadedV) / loadA;
}

export function twoLevelResistance(u1V: number, i1A: number, u2V: number, i2A: number): number {
  return (u1V - u2V) / (i2A - i1A);
}

export type ResistanceMethod = 'switch_on' | 'switch_off' | 'two_level';

export interface ResistanceReading {
  method: ResistanceMethod;
  /** Host time of the step, s. */
  atS: number;
  ohm: number;
  /** U_open, U_load before switch-off, or U1. */
  uBeforeV: number;
  /** U_load after switch-on, U_recovered, or U2. */
  uAfterV: number;
  /** The loaded current (switch-on/-off) or I1. */
  iBeforeA: number;
  /** The loaded current (switch-on/-off) or I2. */
  iAfterA: number;
  /** How long the level before the step had lasted, s. */
  dwellS: number;
}

export interface MethodSummary {
  count: number;
  first: ResistanceReading;
  last: ResistanceReading;
  minOhm: number;
  maxOhm: number;
  meanOhm: number;
}

export type ResistanceSummary = Partial<Record<ResistanceMethod, MethodSummary>>;

export interface ResistanceSample {
  hostS: number;
  volts: number;
  amps: number;
  loadOn: boolean;
}

export interface DcResistanceOptions {
  /** Loaded current below which no reading is taken (noise would dominate). @default 0.005 A */
  minCurrentA?: number;
  /** Relative change of the loaded current that counts as a second level. @default 0.2 */
  levelChange?: number;
  /** How far into the higher level U2 is read (the method's 1 s). @default 1 s */
  secondLevelS?: number;
  /** Unloaded frames averaged for U_open, taken from the last `restWindowS`. @default 10 frames, 5 s */
  restFrames?: number;
  restWindowS?: number;
}

export class DcResistanceTracker {
  private readonly o: Required<DcResistanceOptions>;
  private prev: ResistanceSample | null = null;
  private spare: ResistanceSample | null = null;
  private rest: ResistanceSample[] = [];
  private levelSince = 0;
  private upper: {
    u1: number;
    i1: number;
    at: number;
    dwell: number;
    u2: number;
    i2: number;
  } | null = null;
  private readonly summary: ResistanceSummary = {};

  constructor(o: DcResistanceOptions = {}) {
    this.o = {
      minCurrentA: 0.005,
      levelChange: 0.2,
      secondLevelS: 1,
      restFrames: 10,
      restWindowS: 5,
      ...o,
    };
  }

  /** One frame; `s` is read, not kept (what is kept is copied), so a caller may pass the same object every time. */
  add(s: Readonly<ResistanceSample>): void {
    const p = this.prev;
    // Two records taking turns as the frame before, rather than an object per frame.
    const next = this.spare ?? { hostS: 0, volts: 0, amps: 0, loadOn: false };
    next.hostS = s.hostS;
    next.volts = s.volts;
    next.amps = s.amps;
    next.loadOn = s.loadOn;
    this.spare = p;
    this.prev = next;
    if (!Number.isFinite(s.volts) || !Number.isFinite(s.amps)) return;
    if (
      this.upper &&
      !(
        s.loadOn &&
        this.sameLevel(s.amps, this.upper.i2) &&
        s.hostS - this.upper.at <= this.o.secondLevelS
      )
    )
      this.closeUpper();
    if (!s.loadOn) {
      if (p?.loadOn && p.amps > this.o.minCurrentA) {
        this.record({
          method: 'switch_off',
          atS: s.hostS,
          ohm: loadStepResistance(s.volts, p.volts, p.amps),
          uBeforeV: p.volts,
          uAfterV: s.volts,
          iBeforeA: p.amps,
          iAfterA: p.amps,
          dwellS: s.hostS - this.levelSince,
        });
      }
      if (!p || p.loadOn) this.levelSince = s.hostS;
      this.rest.push({ hostS: s.hostS, volts: s.volts, amps: s.amps, loadOn: s.loadOn });
      if (this.rest.length > this.o.restFrames) this.rest.shift();
      return;
    }
    if (!p || !p.loadOn) {
      const recent = this.rest.filter((r) => s.hostS - r.hostS <= this.o.restWindowS);
      if (recent.length > 0 && s.amps > this.o.minCurrentA) {
        const open = recent.reduce((t, r) => t + r.volts, 0) / recent.length;
        this.record({
          method: 'switch_on',
          atS: s.hostS,
          ohm: loadStepResistance(open, s.volts, s.amps),
          uBeforeV: open,
          uAfterV: s.volts,
          iBeforeA: s.amps,
          iAfterA: s.amps,
          dwellS: s.hostS - this.levelSince,
        });
      }
      this.rest = [];
      this.levelSince = s.hostS;
      return;
    }
    if (this.upper) {
      this.upper.u2 = s.volts;
      this.upper.i2 = s.amps;
      return;
    }
    if (!this.sameLevel(s.amps, p.amps)) {
      if (s.amps > p.amps && p.amps > this.o.minCurrentA) {
        this.upper = {
          u1: p.volts,
          i1: p.amps,
          at: s.hostS,
          dwell: s.hostS - this.levelSince,
          u2: s.volts,
          i2: s.amps,
        };
      }
      this.levelSince = s.hostS;
    }
  }

  /** Readings so far; a second level still open at the end of the run is counted as it stands. */
  result(): ResistanceSummary {
    if (this.upper) this.closeUpper();
    return this.summary;
  }

  private sameLevel(a: number, b: number): boolean {
    return Math.abs(a - b) <= this.o.levelChange * Math.max(Math.abs(a), Math.abs(b));
  }

  private closeUpper(): void {
    const u = this.upper!;
    this.upper = null;
    this.record({
      method: 'two_level',
      atS: u.at,
      ohm: twoLevelResistance(u.u1, u.i1, u.u2, u.i2),
      uBeforeV: u.u1,
      uAfterV: u.u2,
      iBeforeA: u.i1,
      iAfterA: u.i2,
      dwellS: u.dwell,
    });
  }

  private record(r: ResistanceReading): void {
    const m = this.summary[r.method];
    if (!m) {
      this.summary[r.method] = {
        count: 1,
        first: r,
        last: r,
        minOhm: r.ohm,
        maxOhm: r.ohm,
        meanOhm: r.ohm,
      };
      return;
    }
    m.count++;
    m.last = r;
    m.minOhm = Math.min(m.minOhm, r.ohm);
    m.maxOhm = Math.max(m.maxOhm, r.ohm);
    m.meanOhm += (r.ohm - m.meanOhm) / m.count;
  }
}
