/**
 * A battery beyond the rig's voltage range: a 12 V lead-acid block (six cells, about 12.7 V at
 * rest: common practice) on a bench rig whose divider halves the voltage into a 3.3 V ADC, so
 * the channel tops out near 6.6 V (voltage divider: Vout = Vin × Rb / (Rt + Rb), Ohm's law).
 */
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { assess } from '../../src/assess/assess.js';
import { runAssess } from '../../src/assess/run-assess.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import {
  batteryRangeWarning,
  checkStartVoltage,
  fullScaleError,
} from '../../src/chemistry/full-scale.js';
import { checkRestingVoltage } from '../../src/chemistry/limits.js';
import { ErrorCodes } from '../../src/core/errors.js';

const all = loadChemistries();
const lead = findChemistry(all, 'lead-acid');
const liIon = findChemistry(all, 'li-ion');
const BENCH = fileURLToPath(new URL('../../config/rigs/bench-20mohm.yaml', import.meta.url));

describe('a reading pinned at full scale is its own refusal', () => {
  it('a 12 V block read as 6.6 V on a 6.6 V range: beyond the range, not a flat battery', async () => {
    const chain = new AnalogChain(await loadRigProfile(BENCH));
    const fs = chain.fullScale().volts;
    // 3.3 V × (10 kΩ + 10 kΩ) / 10 kΩ, less one count of 4096.
    expect(fs).toBeCloseTo((6.6 * 4095) / 4096, 9);
    const pinned = chain.volts(chain.maxCount);
    // Without the range check, the precheck misreads the pinned value as a run-down block.
    const old = checkRestingVoltage(lead, 6, pinned, 1.75, all);
    expect(old.ok).toBe(false);
    if (!old.ok) expect(old.reason).toBe('below_min_rest');

    const r = checkStartVoltage(lead, 6, pinned, 1.75, all, fs);
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.reason).toBe('beyond_range');
    expect(r.error.code).toBe(ErrorCodes.BEYOND_RANGE);
    expect(r.error.exitCode).toBe(2);
    expect(r.error.message).toContain('at its full scale of 6.6 V');
    expect(r.error.message).toContain('divider_top_ohm');
    expect(r.error.message).not.toMatch(/flat|run-down|ruined/);
  });

  it('a Li-ion cell at 4.1 V on the same range goes on to the chemistry check', () => {
    expect(checkStartVoltage(liIon, 1, 4.1, 3.0, all, 6.6).ok).toBe(true);
    const r = checkStartVoltage(liIon, 1, 2.9, 3.0, all, 6.6);
    expect(!r.ok && r.reason).toBe('at_or_below_cutoff');
  });

  it('a current at the top of its range is named as such', () => {
    const e = fullScaleError('current', 5.4, 5.44, 'load current');
    expect(e?.code).toBe(ErrorCodes.BEYOND_RANGE);
    expect(e?.message).toContain('amplifier_gain');
    expect(fullScaleError('current', 2.5, 5.44, 'load current')).toBeNull();
  });
});

describe('assess with a battery warns when a full one is beyond the voltage range', () => {
  it('six lead-acid cells (2.3 V/cell just off float charge: common practice) on a 6.6 V range', async () => {
    const { report, text } = await runAssess({ rig: BENCH, chemistry: 'lead-acid', cells: 6 });
    expect(report.warnings.join('\n')).toContain('6 × lead-acid rests at up to 13.8 V');
    expect(text).toContain('divider_top_ohm of about');
  });

  it('the divider it suggests does take the full battery inside the range (Vout = Vin × Rb / (Rt + Rb))', async () => {
    const profile = await loadRigProfile(BENCH);
    const chain = new AnalogChain(profile);
    const w = batteryRangeWarning(
      lead,
      6,
      chain.fullScale().volts,
      profile.adc.vref_V,
      profile.voltage.divider_bottom_ohm,
    )!;
    const top = Number(/divider_top_ohm of about (\d+(?:\.\d+)?)/.exec(w)![1]);
    const wider = new AnalogChain({
      ...profile,
      voltage: { ...profile.voltage, divider_top_ohm: top },
    });
    expect(13.8).toBeLessThan(0.98 * wider.fullScale().volts);
    expect(
      13.8 * (profile.voltage.divider_bottom_ohm / (top + profile.voltage.divider_bottom_ohm)),
    ).toBeLessThan(profile.adc.vref_V);
  });

  it('one Li-ion cell fits: no warning', async () => {
    const { report } = await runAssess({ rig: BENCH, chemistry: 'li-ion' });
    expect(report.warnings.filter((w) => w.includes('rests at up to'))).toEqual([]);
    expect(assess({ rigFile: 'x', profile: await loadRigProfile(BENCH) }).warnings).toEqual([]);
  });

  it('refuses --cells without --chemistry', async () => {
    await expect(runAssess({ rig: BENCH, cells: 6 })).rejects.toThrow(
      /--cells without --chemistry/,
    );
  });
});
