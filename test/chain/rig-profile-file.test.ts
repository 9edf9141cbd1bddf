import { readdir } from 'node:fs/promises';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { loadRigProfile, parseRigProfile } from '../../src/chain/rig-profile-file.js';

const rigsDir = fileURLToPath(new URL('../../config/rigs/', import.meta.url));

const GOOD = `
name: test rig
adc:         { bits: 12, vref_V: 3.300 }
voltage:     { divider_top_ohm: 10000, divider_bottom_ohm: 10000 }
current:     { shunt_ohm: 0.020, amplifier_gain: 30.30 }
temperature: { ntc_r25_ohm: 10000, ntc_beta_K: 3950, fixed_ohm: 10000, ntc_position: low }
frame:       { baud: 115200 }
`;

function rejection(text: string, where = 'config/rigs/x.yaml'): CellvigilError {
  try {
    parseRigProfile(text, where);
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('the profile was accepted');
}

describe('rig profiles', () => {
  it('every shipped profile loads', async () => {
    const files = (await readdir(rigsDir)).filter((f) => f.endsWith('.yaml'));
    expect(files.length).toBeGreaterThanOrEqual(2);
    for (const f of files) await expect(loadRigProfile(rigsDir + f)).resolves.toHaveProperty('adc');
  });

  it('reads the bench profile as written', async () => {
    const p = await loadRigProfile(`${rigsDir}bench-20mohm.yaml`);
    expect(p.adc).toEqual({ bits: 12, vref_V: 3.3 });
    expect(p.current.shunt_ohm).toBe(0.02);
    expect(p.current.amplifier_gain).toBe(30.3);
    expect(p.temperature.ntc_position).toBe('low');
  });

  it('accepts an inverting stage and Steinhart–Hart coefficients', () => {
    const p = parseRigProfile(
      GOOD.replace('amplifier_gain: 30.30', 'rin_ohm: 330, rf_ohm: 10000').replace(
        'ntc_position: low }',
        'ntc_position: low, steinhart_hart: { a: 1.129148e-3, b: 2.34125e-4, c: 8.76741e-8 } }',
      ),
      'mem',
    );
    expect(p.current.rf_ohm).toBe(10_000);
    expect(p.temperature.steinhart_hart?.c).toBe(8.76741e-8);
  });

  it('a negative shunt names the file, the key, the value and the fix', () => {
    const e = rejection(GOOD.replace('shunt_ohm: 0.020', 'shunt_ohm: -1'));
    expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
    expect(e.exitCode).toBe(2);
    expect(e.message).toContain('config/rigs/x.yaml');
    expect(e.message).toContain('current.shunt_ohm must be a number > 0, got -1');
    expect(e.message).toContain("Set current.shunt_ohm to the shunt's value in ohms.");
  });

  it('rejects an unknown key, naming it and the known ones', () => {
    const e = rejection(GOOD.replace('bits: 12', 'bits: 12, vref: 3.3'));
    expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
    expect(e.message).toContain('adc.vref is not a known key');
    expect(e.message).toContain('known keys here: bits, vref_V');
  });

  it('rejects bits outside 8..24 and fractional bits', () => {
    expect(rejection(GOOD.replace('bits: 12', 'bits: 25')).message).toContain(
      'adc.bits must be from 8 to 24, got 25',
    );
    expect(rejection(GOOD.replace('bits: 12', 'bits: 7')).message).toContain(
      'adc.bits must be from 8 to 24, got 7',
    );
    expect(rejection(GOOD.replace('bits: 12', 'bits: 12.5')).message).toContain(
      'adc.bits must be a whole number',
    );
  });

  it('needs exactly one of amplifier_gain and rin_ohm + rf_ohm', () => {
    const both = rejection(
      GOOD.replace('amplifier_gain: 30.30', 'amplifier_gain: 30.3, rin_ohm: 330, rf_ohm: 10000'),
    );
    const neither = rejection(GOOD.replace(', amplifier_gain: 30.30', ''));
    const half = rejection(GOOD.replace('amplifier_gain: 30.30', 'rin_ohm: 330'));
    for (const e of [both, neither, half]) {
      expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
      expect(e.message).toContain(
        'current must give either amplifier_gain or both rin_ohm and rf_ohm',
      );
      expect(e.message).toContain('Use amplifier_gain for a non-inverting stage');
    }
  });

  it('rejects a missing section, a wrong type and a bad position', () => {
    expect(rejection(GOOD.replace(/^frame:.*$/m, '')).message).toContain('frame is missing');
    expect(rejection(GOOD.replace('vref_V: 3.300', 'vref_V: "3.3"')).message).toContain(
      'adc.vref_V must be a number, got "3.3"',
    );
    expect(rejection(GOOD.replace('ntc_position: low', 'ntc_position: middle')).message).toContain(
      'temperature.ntc_position must be low or high, got "middle"',
    );
  });

  it('rejects YAML that is not a mapping, and broken YAML', () => {
    expect(rejection('').message).toContain('the rig profile must be a YAML mapping');
    const e = rejection('adc: { bits: 12\n');
    expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
    expect(e.message).toContain('not valid YAML');
  });

  it('a missing file is a read error naming the path and the fix', async () => {
    const err = await loadRigProfile('/nonexistent/rig.yaml').catch((e: unknown) => e);
    expect(err).toBeInstanceOf(CellvigilError);
    expect((err as CellvigilError).code).toBe(ErrorCodes.CONFIG_READ);
    expect((err as Error).message).toContain('/nonexistent/rig.yaml');
    expect((err as Error).message).toContain('config/rigs/');
  });
});
