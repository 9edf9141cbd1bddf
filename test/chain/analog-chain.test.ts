import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import { betaResistance } from '../../src/chain/thermistor.js';

const rigPath = (name: string): string =>
  fileURLToPath(new URL(`../../config/rigs/${name}`, import.meta.url));

function profile(current: RigProfile['current'], extra: Partial<RigProfile> = {}): RigProfile {
  return {
    adc: { bits: 12, vref_V: 3.3 },
    voltage: { divider_top_ohm: 10_000, divider_bottom_ohm: 10_000 },
    current,
    temperature: { ntc_r25_ohm: 10_000, ntc_beta_K: 3950, fixed_ohm: 10_000, ntc_position: 'low' },
    frame: { baud: 115200 },
    ...extra,
  };
}

const parallel = (a: number, b: number): number => (a * b) / (a + b);

describe('analog chain: facts of the trade', () => {
  it('an inverting stage of 10 kΩ over 330 Ω has gain 30.3 (fact of the trade)', () => {
    const chain = new AnalogChain(profile({ shunt_ohm: 0.02, rin_ohm: 330, rf_ohm: 10_000 }));
    expect(chain.amplifierGain).toBeCloseTo(30.3, 1);
  });

  it('3 A through 20 mΩ is 60 mV, which gain 30.3 makes 1.818 V at the ADC (fact of the trade)', () => {
    const chain = new AnalogChain(profile({ shunt_ohm: 0.02, rin_ohm: 330, rf_ohm: 10_000 }));
    const adcVolts = chain.countsForAmps(3) * chain.adcVoltsPerCount;
    expect(adcVolts).toBeCloseTo(1.818, 3);
    expect(chain.amps(chain.countsForAmps(3))).toBeCloseTo(3, 12);
  });

  it('0.66 mV of input offset through 20 mΩ reads as 33 mA (fact of the trade)', () => {
    const chain = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    const offsetCounts = (0.00066 * chain.amplifierGain) / chain.adcVoltsPerCount;
    expect(chain.amps(offsetCounts)).toBeCloseTo(0.033, 12);
  });

  it('a 10-bit ADC on 3.3 V behind gain 30.3 and 20 mΩ is worth about 5.3 mA a count (fact of the trade)', async () => {
    const chain = new AnalogChain(await loadRigProfile(rigPath('inverting-10bit.yaml')));
    expect(chain.ampsPerCount * 1000).toBeCloseTo(5.3, 1);
    expect(chain.adcVoltsPerCount).toBeCloseTo(3.3 / 1024, 15);
  });

  it('180 kΩ across a 10 kΩ feedback resistor makes 9.474 kΩ and lowers the gain by about 5.3 % (fact of the trade)', () => {
    const rf = parallel(10_000, 180_000);
    expect(rf / 1000).toBeCloseTo(9.474, 3);
    const nominal = new AnalogChain(profile({ shunt_ohm: 0.02, rin_ohm: 330, rf_ohm: 10_000 }));
    const loaded = new AnalogChain(profile({ shunt_ohm: 0.02, rin_ohm: 330, rf_ohm: rf }));
    expect((1 - loaded.amplifierGain / nominal.amplifierGain) * 100).toBeCloseTo(5.3, 1);
  });

  it('a divider of 510 kΩ over 330 Ω from 3.3 V gives about 2.13 mV (fact of the trade)', () => {
    const chain = new AnalogChain(
      profile(
        { shunt_ohm: 0.02, amplifier_gain: 30.3 },
        { voltage: { divider_top_ohm: 510_000, divider_bottom_ohm: 330 } },
      ),
    );
    expect(chain.countsForVolts(3.3) * chain.adcVoltsPerCount * 1000).toBeCloseTo(2.13, 2);
  });

  it('a 10 kΩ NTC against 10 kΩ fixed sits at half the reference at 25 °C, either way round (fact of the trade)', () => {
    for (const ntc_position of ['low', 'high'] as const) {
      const chain = new AnalogChain(
        profile(
          { shunt_ohm: 0.02, amplifier_gain: 30.3 },
          {
            temperature: { ntc_r25_ohm: 10_000, ntc_beta_K: 3950, fixed_ohm: 10_000, ntc_position },
          },
        ),
      );
      expect(chain.countsForCelsius(25)).toBeCloseTo(2048, 9);
      expect(chain.celsius(2048)).toBeCloseTo(25, 9);
    }
  });

  it('an NTC is negative: in the low position hotter reads fewer counts, in the high position more (fact of the trade)', () => {
    const low = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    expect(low.countsForCelsius(50)).toBeLessThan(low.countsForCelsius(25));
    const high = new AnalogChain(
      profile(
        { shunt_ohm: 0.02, amplifier_gain: 30.3 },
        {
          temperature: {
            ntc_r25_ohm: 10_000,
            ntc_beta_K: 3950,
            fixed_ohm: 10_000,
            ntc_position: 'high',
          },
        },
      ),
    );
    expect(high.countsForCelsius(50)).toBeGreaterThan(high.countsForCelsius(25));
  });
});

describe('analog chain: conventions of docs/rig-profile.md', () => {
  it('the bench profile: one count is vref/2^bits, the 10k/10k divider doubles it', async () => {
    const chain = new AnalogChain(await loadRigProfile(rigPath('bench-20mohm.yaml')));
    expect(chain.adcVoltsPerCount).toBe(3.3 / 4096);
    expect(chain.voltsPerCount).toBeCloseTo((2 * 3.3) / 4096, 15);
    expect(chain.volts(2000)).toBeCloseTo((2000 * 6.6) / 4096, 12);
    expect(chain.amps(1000)).toBeCloseTo((1000 * 3.3) / 4096 / (30.3 * 0.02), 12);
    const fs = chain.fullScale();
    expect(fs.volts).toBeCloseTo((4095 * 6.6) / 4096, 12);
    expect(fs.amps).toBeCloseTo((4095 * 3.3) / 4096 / (30.3 * 0.02), 12);
  });

  it('volts, amps and °C invert their counts', () => {
    const chain = new AnalogChain(profile({ shunt_ohm: 0.01, amplifier_gain: 50 }));
    for (const v of [0, 1.2, 3.7, 4.2])
      expect(chain.volts(chain.countsForVolts(v))).toBeCloseTo(v, 12);
    for (const a of [0, 0.5, 2, 5]) expect(chain.amps(chain.countsForAmps(a))).toBeCloseTo(a, 12);
    for (const t of [-20, 0, 25, 45, 60, 90])
      expect(chain.celsius(chain.countsForCelsius(t))).toBeCloseTo(t, 9);
  });

  it('uses Steinhart–Hart coefficients when given, else the Beta equation', () => {
    const k = { a: 1.129148e-3, b: 2.34125e-4, c: 8.76741e-8 };
    const beta = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    const sh = new AnalogChain(
      profile(
        { shunt_ohm: 0.02, amplifier_gain: 30.3 },
        {
          temperature: {
            ntc_r25_ohm: 10_000,
            ntc_beta_K: 3950,
            fixed_ohm: 10_000,
            ntc_position: 'low',
            steinhart_hart: k,
          },
        },
      ),
    );
    const counts = beta.countsForCelsius(70);
    expect(beta.celsius(counts)).toBeCloseTo(70, 9);
    expect(Math.abs(sh.celsius(counts) - 70)).toBeGreaterThan(0.1);
    expect(sh.celsius(sh.countsForCelsius(70))).toBeCloseTo(70, 9);
  });

  it('the NTC resistance comes from the divider in both positions', () => {
    const r = betaResistance(40, 10_000, 3950);
    const low = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    expect(low.ntcOhms(low.countsForCelsius(40))).toBeCloseTo(r, 6);
    expect(low.ntcOhms(1024)).toBeCloseTo(10_000 / 3, 9);
  });

  it('a thermistor at a rail reads open or shorted, and °C is NaN', () => {
    const low = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    expect(low.thermistorState(0)).toBe('short');
    expect(low.thermistorState(15)).toBe('short');
    expect(low.thermistorState(4095)).toBe('open');
    expect(low.thermistorState(4085)).toBe('open');
    expect(low.thermistorState(2048)).toBe('ok');
    expect(low.celsius(0)).toBeNaN();
    expect(low.celsius(4095)).toBeNaN();
    const high = new AnalogChain(
      profile(
        { shunt_ohm: 0.02, amplifier_gain: 30.3 },
        {
          temperature: {
            ntc_r25_ohm: 10_000,
            ntc_beta_K: 3950,
            fixed_ohm: 10_000,
            ntc_position: 'high',
          },
        },
      ),
    );
    expect(high.thermistorState(0)).toBe('open');
    expect(high.thermistorState(4095)).toBe('short');
  });

  it('−20…80 °C stays clear of the rails for a 10k/10k pairing, so a real temperature is never flagged', () => {
    const chain = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    for (let t = -20; t <= 80; t += 5)
      expect(chain.thermistorState(chain.countsForCelsius(t))).toBe('ok');
  });

  it('reports the temperature step of one count, finer near mid-scale', () => {
    const chain = new AnalogChain(profile({ shunt_ohm: 0.02, amplifier_gain: 30.3 }));
    const at25 = chain.celsiusPerCountAt(25);
    expect(at25).toBeGreaterThan(0.01);
    expect(at25).toBeLessThan(0.1);
    expect(chain.celsiusPerCountAt(-20)).toBeGreaterThan(at25);
    expect(chain.celsiusPerCountAt(90)).toBeGreaterThan(at25);
  });
});
