import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { assess } from '../../src/assess/assess.js';
import { runAssess } from '../../src/assess/run-assess.js';
import {
  fitQuantity,
  sealCalibration,
  CALIBRATION_FORMAT,
} from '../../src/calibration/calibration.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';

const rigFile = (name: string): string =>
  fileURLToPath(new URL(`../../config/rigs/${name}`, import.meta.url));
const INVERTING = rigFile('inverting-10bit.yaml');
const BENCH = rigFile('bench-20mohm.yaml');

function rel(a: number, b: number): number {
  return Math.abs(a - b) / Math.abs(b);
}

async function usageError(p: Promise<unknown>): Promise<CellvigilError> {
  const e = await p.then(
    () => null,
    (err: unknown) => err,
  );
  expect(e).toBeInstanceOf(CellvigilError);
  expect((e as CellvigilError).code).toBe(ErrorCodes.USAGE);
  return e as CellvigilError;
}

describe('assess: facts of the trade', () => {
  it('an inverting stage of 10 kΩ over 330 Ω has a gain of 30.3, and 0.66 mV of input offset through 20 mΩ reads as 33 mA (fact of the trade)', async () => {
    const { report, text } = await runAssess({ rig: INVERTING });
    expect(report.chain.amplifier_gain).toBeCloseTo(10000 / 330, 12);
    expect(report.chain.amplifier_gain).toBeCloseTo(30.3, 1);
    expect(report.front_end.offset_A).toBeCloseTo(0.033, 12);
    expect(text).toContain('reads 33 mA with no current');
  });

  it('a 10-bit ADC on 3.3 V behind a gain of 30.3 and a 20 mΩ shunt is worth about 5.3 mA a count, so it cannot resolve 1 mA (fact of the trade)', async () => {
    const { report, text } = await runAssess({ rig: INVERTING, claimResolutionA: 0.001 });
    expect(report.chain.amps_per_count * 1000).toBeCloseTo(5.3, 1);
    expect(rel(report.chain.amps_per_count, 3.3 / 1024 / (30.3 * 0.02))).toBeLessThan(1e-3);
    expect(report.warnings).toHaveLength(1);
    expect(report.warnings[0]).toContain('cannot resolve 1 mA');
    expect(text).toContain('warning: one count of the current channel is worth 5.32 mA');
    // ... and a claim it can meet gives no warning.
    expect((await runAssess({ rig: INVERTING, claimResolutionA: 0.01 })).report.warnings).toEqual(
      [],
    );
  });

  it('180 kΩ across a 10 kΩ feedback resistor makes 9.474 kΩ and lowers the gain by about 5.3 % (fact of the trade)', async () => {
    const base = await loadRigProfile(INVERTING);
    const parallel = (a: number, b: number): number => (a * b) / (a + b);
    const rf = parallel(10_000, 180_000);
    expect(rf).toBeCloseTo(9474, 0);
    const shunted: RigProfile = { ...base, current: { ...base.current, rf_ohm: rf } };
    const before = assess({ rigFile: 'x', profile: base }).chain;
    const after = assess({ rigFile: 'x', profile: shunted }).chain;
    expect((1 - after.amplifier_gain / before.amplifier_gain) * 100).toBeCloseTo(5.3, 1);
    expect(after.amps_per_count).toBeGreaterThan(before.amps_per_count);
  });

  it('solder and trace resistance in series with a two-terminal shunt is a gain error of connection / shunt: 1 mΩ on 20 mΩ reads 5 % high (common practice)', async () => {
    const { report, text } = await runAssess({ rig: BENCH });
    expect(report.front_end.connection_gain_error).toBeCloseTo(0.05, 12);
    expect(text).toContain('reads 5 % high');
  });

  it("an RC oscillator's few-percent tolerance becomes the same percentage of error in the charge when the rig's clock is used (fact of the trade)", async () => {
    const { report, text } = await runAssess({
      rig: BENCH,
      currentA: 0.5,
      hours: 5,
      rigClockTolerancePct: 3,
    });
    const t = report.test!;
    expect(t.rig_clock!.half_width_Ah / t.capacity_Ah).toBeCloseTo(0.03, 12);
    // Not part of the total: the host clock times the frames.
    expect(t.terms.find((x) => x.term === 'time base')!.basis).toContain('host clock');
    expect(text).toContain("Timed by the rig's own oscillator (±3 %)");
  });
});

describe('assess: resolution and full scale (chain conventions of docs/rig-profile.md: one count = vref / 2^bits)', () => {
  it('gives volts and amps per count and the full scale at the top count', async () => {
    const { report } = await runAssess({ rig: BENCH });
    const c = report.chain;
    expect(c.adc_V_per_count).toBeCloseTo(3.3 / 4096, 15);
    expect(c.volts_per_count).toBeCloseTo((3.3 / 4096) * 2, 15);
    expect(c.full_scale_V).toBeCloseTo((4095 * 3.3 * 2) / 4096, 12);
    expect(c.full_scale_A).toBeCloseTo((4095 * 3.3) / 4096 / (30.3 * 0.02), 12);
  });

  it('gives the thermistor step at several temperatures, matching the derivative of the Beta equation', async () => {
    const { report } = await runAssess({ rig: BENCH, temperatures: [0, 25, 45, 60] });
    // NTC (R0 10 kΩ, B 3950 K) low in a divider with 10 kΩ, 12 bits:
    // counts = 4096·R/(R + F), dR/dT = −B·R/T², so d(counts)/dT = 4096·F/(R + F)² · B·R/T².
    const stepAt = (celsius: number): number => {
      const T = celsius + 273.15;
      const R = 10_000 * Math.exp(3950 * (1 / T - 1 / 298.15));
      return 1 / ((4096 * 10_000 * 3950 * R) / ((R + 10_000) ** 2 * T * T));
    };
    expect(report.chain.degrees_per_count.map((d) => d.celsius)).toEqual([0, 25, 45, 60]);
    for (const d of report.chain.degrees_per_count)
      expect(rel(d.per_count, stepAt(d.celsius))).toBeLessThan(1e-4);
  });

  it('the smallest current worth measuring: one count is 1 % of the reading; uncalibrated, the offset is', async () => {
    const { report, text } = await runAssess({ rig: INVERTING });
    const f = report.smallest_current;
    expect(f.resolution_floor_A).toBeCloseTo(100 * report.chain.amps_per_count, 12);
    expect(f.uncalibrated_floor_A).toBeCloseTo(3.3, 9);
    expect(f.dead_zone_A).toBeCloseTo(0.033, 12);
    expect(f.calibrated_A).toBeCloseTo(f.resolution_floor_A, 12);
    expect(f.uncalibrated_A).toBeCloseTo(3.3, 9);
    expect(text).toContain('dead zone');
  });
});

describe('assess: capacity budget by the GUM (JCGM 100:2008)', () => {
  it('uncalibrated: the profile’s offset and gain error as rectangular half-widths (4.3.7), combined by root sum of squares (5.1.2), k = 2', async () => {
    const { report } = await runAssess({ rig: BENCH, currentA: 1, hours: 5 });
    const t = report.test!;
    expect(t.mode).toBe('uncalibrated');
    expect(t.capacity_Ah).toBe(5);
    const u = Object.fromEntries(t.terms.map((x) => [x.term, x.u_Ah]));
    expect(u['current offset (uncalibrated)']).toBeCloseTo((0.033 * 5) / Math.sqrt(3), 12);
    expect(u['current gain (uncalibrated)']).toBeCloseTo((0.05 * 5) / Math.sqrt(3), 12);
    expect(u['time base']).toBeCloseTo((100e-6 * 5) / Math.sqrt(3), 15);
    const apc = 3.3 / 4096 / (30.3 * 0.02);
    expect(u['quantisation']).toBeCloseTo((apc / 2 / Math.sqrt(3)) * 5, 15);
    const rss = Math.sqrt(t.terms.reduce((s, x) => s + x.u_Ah ** 2, 0));
    expect(t.combined_u_Ah).toBeCloseTo(rss, 15);
    expect(t.expanded_U_Ah).toBeCloseTo(2 * rss, 15);
    expect(t.k).toBe(2);
  });

  it('with a reference meter: its limits at the test current, rectangular, for the whole run', async () => {
    const { report, text } = await runAssess({
      rig: BENCH,
      currentA: 0.5,
      hours: 5,
      referenceAccuracy: '0.5%+0.003',
    });
    const t = report.test!;
    expect(t.mode).toBe('reference_meter');
    expect(t.terms[0]!.u_Ah).toBeCloseTo(((0.005 * 0.5 + 0.003) / Math.sqrt(3)) * 5, 15);
    expect(text).toContain('expanded uncertainty, k = 2');
    expect(report.warnings).toEqual([]);
  });

  it('with a calibration file: the fit’s covariance propagated to the test current (5.1.2 with the correlation term)', async () => {
    const points = [0, 1, 2, 3].map((a, i) => ({
      raw_mean: 0,
      nominal: 0.033 + 1.057 * a + [0.0004, -0.0003, 0.0002, -0.0001][i]!,
      reference: a,
      reference_u: 0.002,
    }));
    const current = fitQuantity('current', points, 'gain_offset').calibration;
    const cal = sealCalibration({
      format: CALIBRATION_FORMAT,
      rig: 'bench',
      date: '2026-01-01',
      reference_instrument: 'DMM',
      current,
    });
    const profile = await loadRigProfile(BENCH);
    const t = assess({
      rigFile: BENCH,
      profile,
      calibration: cal,
      test: { currentA: 1.5, hours: 2 },
    }).test!;
    expect(t.mode).toBe('calibration_file');
    const f = current.fit;
    const x = (1.5 - f.offset) / f.gain;
    const uI = Math.sqrt(x * x * f.u_gain ** 2 + f.u_offset ** 2 + 2 * x * f.cov_gain_offset);
    expect(t.terms[0]!.u_Ah).toBeCloseTo(uI * 2, 15);
    // The correlation matters: without it the term would be larger (gain and offset anticorrelate).
    expect(Math.sqrt(x * x * f.u_gain ** 2 + f.u_offset ** 2) * 2).toBeGreaterThan(
      t.terms[0]!.u_Ah,
    );
  });

  it('warns when the test current is beyond full scale', async () => {
    const { report } = await runAssess({
      rig: INVERTING,
      currentA: 6,
      hours: 1,
      referenceAccuracy: '1%',
    });
    expect(report.warnings.join('\n')).toContain("beyond the current channel's full scale");
  });
});

describe('assess: options', () => {
  it('refuses a current without hours, a budget option without a test, and both a calibration and a reference accuracy', async () => {
    expect((await usageError(runAssess({ rig: BENCH, currentA: 1 }))).message).toContain('--hours');
    expect(
      (await usageError(runAssess({ rig: BENCH, referenceAccuracy: '1%' }))).message,
    ).toContain('--current <A> --hours <h>');
    expect(
      (
        await usageError(
          runAssess({
            rig: BENCH,
            currentA: 1,
            hours: 1,
            calibration: 'c.json',
            referenceAccuracy: '1%',
          }),
        )
      ).message,
    ).toContain('not both');
    expect((await usageError(runAssess({ rig: BENCH, currentA: -1, hours: 1 }))).message).toContain(
      '--current',
    );
  });

  it('the JSON report carries every figure of the text', async () => {
    const { report } = await runAssess({
      rig: BENCH,
      currentA: 1,
      hours: 2,
      claimResolutionA: 0.001,
    });
    const json = JSON.parse(JSON.stringify(report)) as Record<string, unknown>;
    expect(Object.keys(json).sort()).toEqual([
      'chain',
      'front_end',
      'rig',
      'smallest_current',
      'test',
      'warnings',
    ]);
    expect(Object.keys(json['test'] as object)).toEqual(
      expect.arrayContaining([
        'capacity_Ah',
        'terms',
        'combined_u_Ah',
        'expanded_U_Ah',
        'k',
        'expanded_relative',
        'mode',
      ]),
    );
  });
});
