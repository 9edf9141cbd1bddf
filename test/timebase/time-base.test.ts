import { describe, expect, it } from 'vitest';
import { Integrator } from '../../src/session/integrator.js';
import { mulberry32 } from '../../src/sim/prng.js';
import { RateEstimator } from '../../src/timebase/rate-estimator.js';
import { TimeBase, type Stamp } from '../../src/timebase/time-base.js';

interface Arrival {
  seq: number;
  tick: number;
  arrival: number;
}

function stampAll(frames: readonly Arrival[], tb = new TimeBase()): Stamp[] {
  return frames.map((f) => tb.stamp(f.seq, f.tick, f.arrival));
}

/** Charge of a current sequence integrated on the stamps, with the load on throughout. */
function chargeAh(stamps: readonly Stamp[], amps: (k: number) => number): Integrator {
  const integ = new Integrator();
  stamps.forEach((s, k) => integ.add(s.dtMs, 3.7, amps(k), true, s.gap));
  return integ;
}

/** A rig sending a frame every `periodMs` of host time; its clock counts `rigRate` ms per host ms. */
function frames(
  n: number,
  o: {
    periodMs?: number;
    rigRate?: number;
    latencyMs?: number;
    burstMs?: number;
    firstTick?: number;
    firstSeq?: number;
  } = {},
): Arrival[] {
  const period = o.periodMs ?? 100;
  const rate = o.rigRate ?? 1;
  const latency = o.latencyMs ?? 3;
  const out: Arrival[] = [];
  for (let k = 0; k < n; k++) {
    const made = k * period;
    // A USB adapter batching its buffer: everything made in one burst period arrives together.
    const sent = o.burstMs === undefined ? made : (Math.floor(made / o.burstMs) + 1) * o.burstMs;
    out.push({
      seq: ((o.firstSeq ?? 0) + k) % 65536,
      tick: ((o.firstTick ?? 0) + Math.round(made * rate)) % 2 ** 32,
      arrival: 5000 + sent + latency,
    });
  }
  return out;
}

/**
 * A current that changes inside every second: 2 A for half of it, 0.5 A for the other half,
 * with the low half around the frames where one burst ends and the next begins.
 */
const pulsed = (k: number): number => (k % 10 >= 1 && k % 10 <= 5 ? 2 : 0.5);

/** Trapezoid of the same samples on their true, even 100 ms grid. */
function trapezoidAh(n: number, amps: (k: number) => number, stepS: number): number {
  let q = 0;
  for (let k = 1; k < n; k++) q += ((amps(k - 1) + amps(k)) / 2) * stepS;
  return q / 3600;
}

describe('time base: frames on host time', () => {
  it('evenly delivered frames are stamped at their arrival', () => {
    const f = frames(100);
    const s = stampAll(f);
    s.forEach((st, k) => {
      expect(st.hostMs).toBeCloseTo(f[k]!.arrival, 9);
      expect(st.dtMs).toBeCloseTo(k === 0 ? 0 : 100, 9);
      expect(st).toMatchObject({ lost: 0, gap: false, rigRestart: false });
    });
  });

  it('bursts of 10 frames a second integrate to the same charge as even delivery, within 0.1 % (physics: Q = ∫I dt)', () => {
    const n = 18_000; // 30 minutes at 10 frames a second
    const even = chargeAh(stampAll(frames(n)), pulsed).chargeAh;
    const burstStamps = stampAll(frames(n, { burstMs: 1000 }));
    const burst = chargeAh(burstStamps, pulsed).chargeAh;
    const truth = trapezoidAh(n, pulsed, 0.1);
    expect(even).toBeCloseTo(truth, 12);
    expect(Math.abs(burst - even) / even).toBeLessThan(1e-3);
    // Control: stamping each frame at its arrival instead is far off with this current.
    const naive = new Integrator();
    frames(n, { burstMs: 1000 }).forEach((f, k, all) =>
      naive.add(k === 0 ? 0 : f.arrival - all[k - 1]!.arrival, 3.7, pulsed(k), true, false),
    );
    expect(Math.abs(naive.chargeAh - even) / even).toBeGreaterThan(0.05);
  });

  it('stamps never go back, never pass the arrival and never lag it by more than maxLagMs', () => {
    const f = frames(3000, { burstMs: 1000, rigRate: 0.97 });
    let prev = -Infinity;
    stampAll(f, new TimeBase({ maxLagMs: 1000 })).forEach((s, k) => {
      expect(s.hostMs).toBeGreaterThanOrEqual(prev);
      expect(s.hostMs).toBeLessThanOrEqual(f[k]!.arrival);
      expect(f[k]!.arrival - s.hostMs).toBeLessThanOrEqual(1000);
      prev = s.hostMs;
    });
  });
});

describe('time base: rig clock rate', () => {
  it('a rig clock 20 % fast reads +200 000 ppm within 1 % (positive = rig clock fast, per the code)', () => {
    const tb = new TimeBase();
    stampAll(frames(6000, { rigRate: 1.2 }), tb);
    expect(Math.abs(tb.rigClockErrorPpm()! - 200_000)).toBeLessThan(2000);
  });

  it('the same with bursts and jittery delivery', () => {
    const rng = mulberry32(7);
    const jitter = Array.from({ length: 700 }, () => rng() * 30);
    const tb = new TimeBase();
    // every burst late by its own 0..30 ms; frames keep their order
    stampAll(
      frames(6000, { rigRate: 1.2, burstMs: 1000 }).map((x, k) => ({
        ...x,
        arrival: x.arrival + jitter[Math.floor(k / 10)]!,
      })),
      tb,
    );
    expect(Math.abs(tb.rigClockErrorPpm()! - 200_000)).toBeLessThan(2000);
  });

  it('a rig clock 20 % slow reads -200 000 ppm within 1 %', () => {
    const tb = new TimeBase();
    stampAll(frames(6000, { rigRate: 0.8 }), tb);
    expect(Math.abs(tb.rigClockErrorPpm()! + 200_000)).toBeLessThan(2000);
  });

  it('charge follows host time, not the rig clock: 1 A for 10 min is 166.7 mAh (physics: 1/6 Ah)', () => {
    const n = 6001; // 600 s of host time at 10 frames a second
    for (const rigRate of [1.2, 1, 0.95]) {
      const q = chargeAh(stampAll(frames(n, { rigRate, burstMs: 1000 })), () => 1).chargeAh;
      expect(Math.abs(q - 1 / 6) / (1 / 6)).toBeLessThan(2e-3);
    }
  });

  it('no estimate before 5 s and 20 frames of baseline', () => {
    const tb = new TimeBase();
    stampAll(frames(40), tb); // 3.9 s
    expect(tb.rigClockErrorPpm()).toBeNull();
    // A frame's arrival counts as fresh once the next one shows it ended its delivery.
    tb.stamp(40, 5100, 10_100);
    tb.stamp(41, 5200, 10_200);
    expect(tb.rigClockErrorPpm()).not.toBeNull();
  });
});

describe('time base: losses, gaps, wraps and restarts', () => {
  it('sequence gaps are counted as lost frames', () => {
    const f = frames(100).filter((x) => x.seq < 50 || x.seq > 54);
    const s = stampAll(f);
    expect(s.reduce((sum, x) => sum + x.lost, 0)).toBe(5);
    expect(s[50]).toMatchObject({ lost: 5, gap: false });
    expect(s[50]!.dtMs).toBeCloseTo(600, 6);
  });

  it('a sequence gap across the 65535 -> 0 wrap is counted too', () => {
    const f = frames(10, { firstSeq: 65530 }).filter((x) => x.seq !== 65535 && x.seq !== 0);
    expect(stampAll(f).map((s) => s.lost)).toEqual([0, 0, 0, 0, 0, 2, 0, 0]);
  });

  it('a long gap is flagged and its span is kept, not shortened; the integrator books it as bridged', () => {
    const f = frames(200).filter((x) => x.seq < 100 || x.seq >= 150); // 5 s of silence
    const s = stampAll(f);
    expect(s.filter((x) => x.gap)).toHaveLength(1);
    expect(s[100]).toMatchObject({ gap: true, lost: 50 });
    expect(s[100]!.dtMs).toBeCloseTo(5100, 6);
    const integ = chargeAh(s, () => 1);
    expect(integ.bridgedAh).toBeCloseTo(5.1 / 3600, 12);
    expect(integ.chargeAh).toBeCloseTo(19.9 / 3600, 12);
  });

  it('a pause shorter than longGapMs is not a gap', () => {
    const f = frames(100).filter((x) => x.seq < 50 || x.seq >= 65);
    expect(stampAll(f).some((s) => s.gap)).toBe(false);
  });

  it('tick_ms wrapping at 2^32 and seq at 2^16 at the same time is neither a restart nor a gap', () => {
    const f = frames(200, { firstTick: 2 ** 32 - 5_000, firstSeq: 65_500 });
    expect(f.some((x) => x.tick < 10_000)).toBe(true);
    const s = stampAll(f);
    expect(s.some((x) => x.rigRestart || x.gap || x.lost > 0)).toBe(false);
    s.slice(1).forEach((x) => expect(x.dtMs).toBeCloseTo(100, 6));
  });

  it('a rig restart (tick and seq jump back) is detected, flagged as a gap, and stamping carries on', () => {
    const before = frames(100, { firstTick: 7_654_321, firstSeq: 4321 });
    const after = frames(100).map((x) => ({ ...x, arrival: x.arrival + 12_000 }));
    const tb = new TimeBase();
    stampAll(before, tb);
    expect(tb.rigClockErrorPpm()).not.toBeNull();
    const s = stampAll(after, tb);
    expect(s[0]).toMatchObject({ rigRestart: true, gap: true, lost: 0 });
    expect(s[0]!.dtMs).toBeCloseTo(after[0]!.arrival - before.at(-1)!.arrival, 6);
    // The rate estimate starts over: the old clock's baseline says nothing about the new one.
    expect(s.slice(1).some((x) => x.rigRestart || x.gap || x.lost > 0)).toBe(false);
    s.slice(1).forEach((x) => expect(x.dtMs).toBeCloseTo(100, 6));
  });
});

describe('rate estimator', () => {
  it("the least-squares slope of an exact line is the line's slope, also far from zero", () => {
    const r = new RateEstimator();
    for (let k = 0; k < 1000; k++) r.add(3 * 2 ** 32 + k * 100, 1e9 + k * 99.9);
    expect(r.hostPerTick()).toBeCloseTo(0.999, 9);
    // rig counts 100 ms while the host counts 99.9: the rig is fast by 1/0.999 - 1
    expect(r.errorPpm()).toBeCloseTo((1 / 0.999 - 1) * 1e6, 3);
  });

  it('reset starts a new baseline', () => {
    const r = new RateEstimator();
    for (let k = 0; k < 100; k++) r.add(k * 100, k * 200);
    r.reset();
    for (let k = 0; k < 100; k++) r.add(k * 100, 50_000 + k * 100);
    expect(r.hostPerTick()).toBeCloseTo(1, 12);
  });
});
