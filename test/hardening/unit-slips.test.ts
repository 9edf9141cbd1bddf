/**
 * Unit slips in files and options, refused with the likely slip named. The prefixes are the SI
 * ones (m = 10⁻³, k = 10³; SI Brochure, BIPM, 9th edition, from memory); the ranges are common
 * practice for hobby discharge rigs.
 */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { runAssess } from '../../src/assess/run-assess.js';
import {
  fitQuantity,
  sealCalibration,
  CALIBRATION_FORMAT,
  type CalibrationPoint,
} from '../../src/calibration/calibration.js';
import { parseCalibration } from '../../src/calibration/calibration-file.js';
import { fitCheckedQuantity } from '../../src/calibration/quantity-fit.js';
import { parseRigProfile } from '../../src/chain/rig-profile-file.js';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { resolveCutoff } from '../../src/chemistry/limits.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { ratedAgainstRun } from '../../src/report/rated-check.js';
import { reportRuns } from '../../src/report/report-runs.js';

const rig = (name: string): string =>
  fileURLToPath(new URL(`../../config/rigs/${name}`, import.meta.url));
const BENCH = rig('bench-20mohm.yaml');
const BENCH_TEXT = readFileSync(BENCH, 'utf8');

function caught(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (e) {
    expect(e).toBeInstanceOf(CellvigilError);
    return e as CellvigilError;
  }
  throw new Error('expected an error');
}

describe('rig profile', () => {
  it('vref_V: 3300 is refused with "did you mean 3.3 V" (3300 mV = 3.3 V)', () => {
    const e = caught(() =>
      parseRigProfile(BENCH_TEXT.replace('vref_V: 3.300', 'vref_V: 3300'), 'rig.yaml'),
    );
    expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
    expect(e.message).toContain('adc.vref_V: 3300 V is not plausible for an ADC reference');
    expect(e.message).toContain('did you mean 3.3 V? 3300 looks like mV');
    expect(e.message).toContain('(rig.yaml)');
  });
  it('an NTC of 10 (for 10 kΩ) is refused with "did you mean 10000 Ω"', () => {
    const e = caught(() =>
      parseRigProfile(BENCH_TEXT.replace('ntc_r25_ohm: 10000', 'ntc_r25_ohm: 10'), 'rig.yaml'),
    );
    expect(e.message).toContain('did you mean 10000 Ω? 10 looks like kΩ');
  });
  it('a gain of 30300 is refused without a unit hint (a gain has none)', () => {
    const e = caught(() =>
      parseRigProfile(
        BENCH_TEXT.replace('amplifier_gain: 30.30', 'amplifier_gain: 30300'),
        'rig.yaml',
      ),
    );
    expect(e.message).toContain(
      'current.amplifier_gain: 30300 is not plausible for an amplifier gain (1 to 1000)',
    );
  });
  it('the shipped profiles pass', () => {
    for (const f of ['bench-20mohm.yaml', 'inverting-10bit.yaml'])
      expect(() => parseRigProfile(readFileSync(rig(f), 'utf8'), f)).not.toThrow();
  });
});

describe('calibration gains: the same bounds at load as at calibrate', () => {
  // Points whose line has the given gain: reference = gain × nominal.
  const points = (gain: number): CalibrationPoint[] =>
    [0.2, 1.0, 2.0].map((n) => ({
      raw_mean: n * 750,
      nominal: n,
      reference: gain * n,
      reference_u: 0.001,
      nominal_u: 0.0005,
    }));
  const fileWith = (gain: number): string =>
    JSON.stringify(
      sealCalibration({
        format: CALIBRATION_FORMAT,
        rig: 'bench',
        date: '2026-12-01T10:00:00Z',
        reference_instrument: 'DMM',
        current: fitQuantity('current', points(gain), 'gain_offset').calibration,
      }),
    );

  it('a current gain of 12 (its id sealed, so only the gain is wrong) is refused by run as calibrate refuses it', () => {
    const e = caught(() => parseCalibration(fileWith(12), 'cal.json'));
    expect(e.code).toBe(ErrorCodes.CALIBRATION_INVALID);
    expect(e.message).toContain('the current gain is 12, outside 0.5 to 2');
    expect(e.message).toContain('cal.json, current.fit.gain');
    expect(caught(() => fitCheckedQuantity('current', points(12))).code).toBe(
      ErrorCodes.CALIBRATION_FIT,
    );
  });
  it('names the mA slip for a gain near 1000', () => {
    expect(caught(() => parseCalibration(fileWith(1000), 'cal.json')).message).toContain(
      'typed in mA?',
    );
  });
  it('just inside and just outside the band agree between calibrate and load', () => {
    for (const g of [0.51, 1.04, 1.99]) {
      expect(() => fitCheckedQuantity('current', points(g))).not.toThrow();
      expect(() => parseCalibration(fileWith(g), 'cal.json')).not.toThrow();
    }
    for (const g of [0.49, 2.01]) {
      expect(() => fitCheckedQuantity('current', points(g))).toThrow(CellvigilError);
      expect(() => parseCalibration(fileWith(g), 'cal.json')).toThrow(CellvigilError);
    }
  });
});

describe('options', () => {
  it('report --rated 2600 is refused before any folder is read: 2600 mAh is 2.6 Ah', async () => {
    const e = await reportRuns({ folders: ['/nonexistent/run'], ratedAh: 2600 }).then(
      () => null,
      (err: unknown) => err as CellvigilError,
    );
    expect(e?.code).toBe(ErrorCodes.USAGE);
    expect(e?.message).toContain('did you mean 2.6 Ah? 2600 looks like mAh');
  });
  it('report --rated 500 against a run that gave 0.48 Ah to its cutoff: 500 mAh meant', () => {
    expect(ratedAgainstRun(500, 0.48, 'cutoff', 'runs/x')?.message).toContain(
      'did you mean 0.5 Ah?',
    );
    // A run stopped early says nothing about the rating; a plausible rating passes.
    expect(ratedAgainstRun(500, 0.48, 'stopped', 'runs/x')).toBeNull();
    expect(ratedAgainstRun(2.6, 2.45, 'cutoff', 'runs/x')).toBeNull();
  });
  it('--cutoff 3000 for Li-ion names 3 V', () => {
    const liIon = findChemistry(loadChemistries(), 'li-ion');
    const e = caught(() => resolveCutoff(liIon, 1, 3000));
    expect(e.message).toContain('Did you mean 3 V? 3000 looks like mV.');
  });
  it('assess --current 500 on a 5.4 A channel names 0.5 A', async () => {
    const { report } = await runAssess({ rig: BENCH, currentA: 500, hours: 5 });
    expect(report.warnings.join('\n')).toContain('Did you mean 0.5 A (500 looks like mA)?');
  });
});
