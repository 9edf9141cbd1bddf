import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { loadRigProfile, parseRigProfile } from '../../src/chain/rig-profile-file.js';

const BASE = `
adc:         { bits: 12, vref_V: 5.0 }
voltage:     { divider_top_ohm: 10000, divider_bottom_ohm: 10000 }
current:     { shunt_ohm: 0.025, amplifier_gain: 50.9 }
temperature: { ntc_r25_ohm: 10000, ntc_beta_K: 3950, fixed_ohm: 10000, ntc_position: low }
frame:       { baud: 250000 }
`;

// The charger section of a protocol 1.1 rig: amps = monitor volts × monitor_A_per_V.
describe('rig profiles: the charger section', () => {
  it('the CC variant profile carries its charger monitor scale (1 V at 100 mA: 0.1 A/V)', async () => {
    const p = await loadRigProfile(
      fileURLToPath(new URL('../../config/rigs/cv328-cc.yaml', import.meta.url)),
    );
    expect(p.charger).toEqual({ monitor_A_per_V: 0.1 });
  });

  it('is optional, and when given needs a positive monitor scale and nothing else', () => {
    expect(parseRigProfile(BASE, 'x.yaml').charger).toBeUndefined();
    expect(() => parseRigProfile(`${BASE}charger: {}\n`, 'x.yaml')).toThrow(/monitor_A_per_V/);
    expect(() => parseRigProfile(`${BASE}charger: { monitor_A_per_V: -1 }\n`, 'x.yaml')).toThrow(
      /CV_CONFIG_INVALID|charger/,
    );
    expect(() =>
      parseRigProfile(`${BASE}charger: { monitor_A_per_V: 0.1, volts: 4.2 }\n`, 'x.yaml'),
    ).toThrow(/charger/);
  });
});
