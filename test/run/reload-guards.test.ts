import { describe, expect, it } from 'vitest';
import { sealCalibration, type Calibration } from '../../src/calibration/calibration.js';
import { reloadProblem } from '../../src/calibration/reload-check.js';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { encodeDataFrame } from '../../src/protocol/codec.js';
import { LiveHub } from '../../src/live/live-hub.js';
import { liveObserver } from '../../src/run/live-link.js';
import { channelRun } from './channel-run-helper.js';

/** A current calibration of the given gain and offset (the rest as `calibrate` writes it). */
function currentCal(gain: number, offset: number): Calibration {
  const fit = {
    model: 'gain_offset' as const,
    gain,
    offset,
    u_gain: 0.001,
    u_offset: 0.001,
    cov_gain_offset: 0,
    residual_sd: 0.001,
    dof: 2,
  };
  return sealCalibration({
    format: 1,
    rig: 'bench rig',
    date: '2026-12-01T09:00:00Z',
    reference_instrument: 'bench meter',
    current: { points: [], fit },
  });
}

/** Frames of the bench rig (12 bits, 3.3 V, 10k/10k, 20 mΩ × 30.3) with the load on: 3.7 V, 1.2 A. */
async function loadedRun(cal: Calibration | null) {
  const r = await channelRun(cal);
  // Counts: 3.7 V / 2 / (3.3 / 4096) = 2296; 1.2 A × 0.606 V/A / (3.3 / 4096) = 903.
  for (let seq = 0; seq < 5; seq++)
    r.run.line(
      encodeDataFrame({
        channel: 0,
        seq,
        tickMs: seq * 100,
        vRaw: 2296,
        iRaw: 903,
        tRaw: 2048,
        flags: 1,
      }).trimEnd(),
    );
  return r;
}

// The analog chain's conventions (one count = vref / 2^bits; amps = ADC volts / (gain × shunt))
// give the operating point; the bounds are the ones stated in src/calibration/reload-check.ts.
describe('a calibration reloaded mid-run', () => {
  it('an offset of −1 A is refused with the load on; the calibration in force stays', async () => {
    const first = currentCal(1, 0.01);
    const { run } = await loadedRun(first);
    expect(() => run.useCalibration(currentCal(1, -1), 'cal.json')).toThrow(
      expect.objectContaining({ code: 'CV_CALIBRATION_INVALID' }),
    );
    expect(run.pipeline.calibrationId).toBe(first.id);
  });

  it('a gain of 1e-9, or one that moves 1.2 A by 20 %, is refused; a sound recalibration applies', async () => {
    const first = currentCal(1, 0.01);
    const { run } = await loadedRun(first);
    expect(() => run.useCalibration(currentCal(1e-9, 0), 'cal.json')).toThrow(/gain/);
    expect(() => run.useCalibration(currentCal(1.2, 0.01), 'cal.json')).toThrow(/move the current/);
    const sound = currentCal(1.01, 0.005);
    expect(run.useCalibration(sound, 'cal.json')).toEqual({ old: first.id });
    expect(run.pipeline.calibrationId).toBe(sound.id);
  });

  it('one that would make a loaded cell read as charging is refused', () => {
    const scale = {
      fullScale: { volts: 6.6, amps: 5.44 },
      voltsPerCount: 0.0016,
      ampsPerCount: 0.00133,
    };
    const at = { volts: 3.7, amps: 0.3, celsius: 25, loadOn: true };
    expect(reloadProblem(null, currentCal(1, -0.5), scale, at)).toMatch(/into the cell/);
    expect(reloadProblem(null, currentCal(1, -0.6), scale, null)).toMatch(/full scale/);
  });
});

// Li-ion: end of discharge 3.0 V a cell, 60 °C limit, the floor as the shipped profile gives
// them (common practice); a reload may tighten them, never loosen them.
describe('a chemistry profile reloaded mid-run', () => {
  const shipped = findChemistry(loadChemistries(DEFAULT_CHEMISTRIES_PATH), 'li-ion');
  const edited = (floor: number, cutoff: number, maxC: number) => ({
    ...shipped,
    floor_V_per_cell: { ...shipped.floor_V_per_cell, value: floor },
    cutoff_V_per_cell: { ...shipped.cutoff_V_per_cell, value: cutoff },
    max_temperature_C: { ...shipped.max_temperature_C, value: maxC },
  });

  it('a lower floor, a lower cutoff or a higher temperature limit is refused; a tighter one applies', async () => {
    const { run } = await loadedRun(null);
    const floor = shipped.floor_V_per_cell.value;
    const cutoff = shipped.cutoff_V_per_cell.value;
    const maxC = shipped.max_temperature_C.value;
    expect(() => run.useChemistry(edited(0.3, cutoff, maxC))).toThrow(/never loosen/);
    expect(() => run.useChemistry(edited(floor, 0.4, maxC))).toThrow(/cutoff/);
    expect(() => run.useChemistry(edited(floor, cutoff, maxC + 20))).toThrow(/temperature/);
    expect(run.session.cutoffV).toBeCloseTo(cutoff, 9);
    expect(run.useChemistry(edited(floor + 0.1, cutoff + 0.1, maxC - 5))).toEqual({
      floorV: floor + 0.1,
      cutoffV: cutoff + 0.1,
    });
  });
});

describe('the live feed after an accepted reload', () => {
  it("the hello's run info, the cutoff and the time to cutoff use the new values; the history stays", () => {
    const hub = new LiveHub();
    hub.setRun({
      label: 'x',
      run_folder: '/tmp/x',
      chemistry: 'li-ion',
      cells: 1,
      cutoff_V: 3.0,
      floor_V: 2.5,
      calibration_id: 'a',
      started_wall: '2026-12-03T09:00:00Z',
      source: 'sim',
      max_temperature_C: 60,
    });
    const ob = liveObserver(hub);
    // A straight fall of 1 mV a second from 3.5 V: 3.2 V is reached 300 s after 3.5 V.
    for (let s = 0; s <= 120; s++)
      hub.sample({
        host_s: s,
        voltage_V: 3.5 - s * 0.001,
        current_A: 1,
        temperature_C: 25,
        charge_Ah: s / 3600,
        energy_Wh: 0,
        state: 'discharging',
        load_on: true,
      });
    const before = hub.status().time_to_cutoff_s!;
    const seen: string[] = [];
    hub.subscribe((m) => seen.push(m.type));
    const at = { host_s: 120, wall_time: '2026-12-03T09:02:00Z' };
    ob.event!({
      ...at,
      event: 'chemistry_changed',
      file: 'c.yaml',
      chemistry: 'li-ion',
      floor_V: 2.8,
      cutoff_V: 3.2,
      max_temperature_C: 50,
    });
    ob.event!({ ...at, event: 'calibration_changed', old_id: 'a', new_id: 'b', file: 'cal.json' });
    const hello = hub.hello();
    expect(hello.run).toMatchObject({
      cutoff_V: 3.2,
      floor_V: 2.8,
      max_temperature_C: 50,
      calibration_id: 'b',
    });
    expect(hello.status.cutoff_V).toBe(3.2);
    expect(hello.history.points.length).toBeGreaterThan(100);
    expect(seen).toContain('hello');
    // 0.2 V closer at 1 mV a second: 200 s sooner.
    expect(before - hub.status().time_to_cutoff_s!).toBeCloseTo(200, -1);
  });
});
