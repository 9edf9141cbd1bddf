import { describe, expect, it } from 'vitest';
import {
  adcCounts,
  amplifierGain,
  FrontEnd,
  ntcOhm,
  type FrontEndErrors,
} from '../../src/sim/front-end.js';
import { mulberry32 } from '../../src/sim/prng.js';
import { BENCH_PROFILE } from './helpers.js';

const EXACT: FrontEndErrors = {
  inputOffsetV: 0,
  connectionOhm: 0,
  voltageGainError: 0,
  noiseCounts: 0,
};
const fe = (errors: Partial<FrontEndErrors> = {}, profile = BENCH_PROFILE) =>
  new FrontEnd(profile, { ...EXACT, ...errors }, mulberry32(7));

describe('analog front end', () => {
  it('fact of the trade + arithmetic: 3 A through 20 mΩ is 60 mV, ×30.3 is 1.818 V, 12 bits of 3.3 V give floor(1.818/3.3·4096)', () => {
    const r = fe().current(3);
    expect(r.sensedV).toBeCloseTo(0.06, 12);
    expect(r.adcV).toBeCloseTo(1.818, 12);
    expect(r.counts).toBe(Math.floor((1.818 / 3.3) * 4096));
    expect(r.counts).toBe(2256);
  });

  it('fact of the trade: 0.66 mV input offset reads as 33 mA through 20 mΩ', () => {
    expect(0.00066 / 0.02).toBeCloseTo(0.033, 12);
    const counts = fe({ inputOffsetV: 0.00066 }).current(0).counts;
    const ampsPerCount = 3.3 / 4096 / (30.3 * 0.02);
    // Floor quantisation: the reading lies within one count below the offset.
    expect(counts * ampsPerCount).toBeLessThanOrEqual(0.033);
    expect(counts * ampsPerCount).toBeGreaterThan(0.033 - ampsPerCount);
  });

  it('connection resistance in series with the shunt is a gain error of connection / shunt', () => {
    const r = fe({ connectionOhm: 0.0008 }).current(1);
    expect(r.sensedV / 0.02).toBeCloseTo(1.04, 12);
  });

  it('a negative offset cannot drive a single-supply amplifier below 0 counts', () => {
    expect(fe({ inputOffsetV: -0.001 }).current(0).counts).toBe(0);
  });

  it('fact of the trade: a 10k/10k divider halves the cell voltage (4.0 V → 2.0 V → floor(2/3.3·4096))', () => {
    const r = fe().voltage(4);
    expect(r.adcV).toBeCloseTo(2, 12);
    expect(r.counts).toBe(Math.floor((2 / 3.3) * 4096));
    expect(fe({ voltageGainError: 0.01 }).voltage(4).adcV).toBeCloseTo(2.02, 12);
  });

  it('physics (Beta equation): an NTC is R25 at 25 °C and lower when warmer', () => {
    expect(ntcOhm(25, 10000, 3950)).toBeCloseTo(10000, 6);
    // R(T) = R25·exp(B(1/T − 1/T25)) at 50 °C with B = 3950 K.
    expect(ntcOhm(50, 10000, 3950)).toBeCloseTo(
      10000 * Math.exp(3950 * (1 / 323.15 - 1 / 298.15)),
      6,
    );
    expect(ntcOhm(60, 10000, 3950)).toBeLessThan(ntcOhm(40, 10000, 3950));
  });

  it('NTC position: low reads fewer counts when warmer, high reads more; equal parts at 25 °C give half scale', () => {
    const low = fe();
    const high = fe(
      {},
      { ...BENCH_PROFILE, temperature: { ...BENCH_PROFILE.temperature, ntc_position: 'high' } },
    );
    expect(low.temperature(25).counts).toBe(2048);
    expect(high.temperature(25).counts).toBe(2048);
    expect(low.temperature(60).counts).toBeLessThan(low.temperature(25).counts);
    expect(high.temperature(60).counts).toBeGreaterThan(high.temperature(25).counts);
    const r = ntcOhm(60, 10000, 3950);
    expect(low.temperature(60).adcV).toBeCloseTo((3.3 * r) / (r + 10000), 12);
  });

  it('quantises by floor and clamps to 0..2^bits−1', () => {
    expect(adcCounts(3.3, 3.3, 12)).toBe(4095);
    expect(adcCounts(5, 3.3, 12)).toBe(4095);
    expect(adcCounts(-1, 3.3, 12)).toBe(0);
    expect(adcCounts(3.3 / 4096 - 1e-9, 3.3, 12)).toBe(0);
  });

  it('noise has the set spread in counts and is reproducible from the seed', () => {
    const read = (seed: number) => {
      const f = new FrontEnd(BENCH_PROFILE, { ...EXACT, noiseCounts: 2 }, mulberry32(seed));
      return Array.from({ length: 4000 }, () => f.voltage(3.7).counts);
    };
    const a = read(11);
    expect(read(11)).toEqual(a);
    const mean = a.reduce((s, x) => s + x, 0) / a.length;
    const sd = Math.sqrt(a.reduce((s, x) => s + (x - mean) ** 2, 0) / (a.length - 1));
    expect(sd).toBeGreaterThan(1.8);
    expect(sd).toBeLessThan(2.2);
    expect(mean).toBeCloseTo((3.7 / 2 / 3.3) * 4096 - 0.5, 0);
  });

  it('an inverting stage given as rin/rf has gain rf/rin', () => {
    const profile = {
      ...BENCH_PROFILE,
      current: { shunt_ohm: 0.01, rin_ohm: 1000, rf_ohm: 47000 },
    };
    expect(amplifierGain(profile)).toBe(47);
    expect(() => amplifierGain({ ...BENCH_PROFILE, current: { shunt_ohm: 0.01 } })).toThrow(
      /current\.amplifier_gain/,
    );
  });
});
