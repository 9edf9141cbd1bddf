import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { checkRestingVoltage } from '../../src/chemistry/limits.js';
import { exitCodeFor } from '../../src/record/result.js';
import { parseScheduleOption } from '../../src/schedule/schedule.js';
import { plausibilityFor, VOLTAGE_HEADROOM } from '../../src/session/plausibility.js';
import type { SessionSettings } from '../../src/session/session.js';
import { Bench, liIonSettings } from './bench.js';

// One NiMH cell from config/chemistries.yaml: highest resting voltage 1.5 V (from memory),
// cutoff 1.0 V (IEC 61951-2, from memory), floor 0.9 V (common practice).
const NIMH = findChemistry(loadChemistries(), 'nimh');
/** The bench rig's current channel: 3.3 V / 4096 counts / (30.3 × 0.02 Ω). */
const AMPS_PER_COUNT = 3.3 / 4096 / (30.3 * 0.02);

function nimhSettings(over: Partial<SessionSettings> = {}): SessionSettings {
  return {
    ...liIonSettings(),
    cutoffV: NIMH.cutoff_V_per_cell.value,
    floorV: NIMH.floor_V_per_cell.value,
    maxTemperatureC: NIMH.max_temperature_C.value,
    plausibility: plausibilityFor({
      maxRestVPerCell: NIMH.max_rest_V_per_cell.value,
      cells: 1,
      ampsPerCount: AMPS_PER_COUNT,
    }),
    checkRest: (v) => {
      const r = checkRestingVoltage(NIMH, 1, v, NIMH.cutoff_V_per_cell.value);
      return r.ok ? null : r.error.message;
    },
    ...over,
  };
}

/** A NiMH cell at 1.30 V resting, 1.25 V and 0.5 A under load; `bad` replaces readings from `from` ms on. */
function nimhBench(
  bad: { volts?: number; amps?: number } = {},
  window: { from: number; to: number } = { from: Infinity, to: Infinity },
  settings = nimhSettings(),
): Bench {
  const b = new Bench(settings);
  b.reading = (t, on) => {
    const inWindow = t >= window.from && t < window.to;
    return {
      volts: on && inWindow && bad.volts !== undefined ? bad.volts : on ? 1.25 : 1.3,
      amps: on ? (inWindow && bad.amps !== undefined ? bad.amps : 0.5) : 0,
      celsius: 25,
      thermistor: 'ok',
      flags: 0,
    };
  };
  return b;
}

describe('implausible readings', () => {
  it(`the limit is the chemistry's highest resting voltage × cells plus ${VOLTAGE_HEADROOM * 100} %: 1.875 V for one NiMH cell`, () => {
    expect(plausibilityFor({ maxRestVPerCell: 1.5, cells: 1, ampsPerCount: 0.001 }).maxVolts).toBe(
      1.875,
    );
    expect(plausibilityFor({ maxRestVPerCell: 1.5, cells: 4, ampsPerCount: 0.001 }).maxVolts).toBe(
      7.5,
    );
  });

  for (const volts of [6.6, 3.2]) {
    it(`a NiMH cell reading ${volts} V under load (its highest resting voltage is 1.5 V, from memory) is not integrated, counted, alarmed, and ends the run as implausible_reading`, () => {
      const b = nimhBench({ volts }, { from: 20_000, to: 35_000 });
      b.start();
      b.run(60_000, () => b.session.state === 'ended');
      expect(b.end).toMatchObject({ reason: 'implausible_reading' });
      expect(b.end!.detail).toContain(`${volts.toFixed(3)} V is above 1.875 V`);
      // Held 2 s and 5 frames before the load went off: about 21 frames at 10 a second.
      const offAt = b.loadCommands(false)[0]!;
      expect(offAt).toBeGreaterThanOrEqual(22_000);
      expect(offAt).toBeLessThanOrEqual(22_200);
      expect(b.session.plausibility.implausibleFrames).toBeGreaterThanOrEqual(20);
      expect(b.events('implausible_reading')).toHaveLength(10); // the first ten in full
      expect(b.events('implausible_reading')[0]).toMatchObject({ volts, count: 1 });
      // Energy is V·I over time (physics): the bad frames are bridged at the neighbouring
      // readings, 1.25 V × 0.5 A, so energy / charge stays 1.25 V.
      const i = b.session.integrator;
      expect(i.energyWh / i.chargeAh).toBeCloseTo(1.25, 9);
      expect(b.session.lastLoadedV).toBe(1.25);
      expect(exitCodeFor('implausible_reading', false)).toBe(3);
    });
  }

  it('a short burst of bad frames is left out, its time bridged at the last good reading and counted as doubt; the run carries on', () => {
    const b = nimhBench({ volts: 6.6 }, { from: 20_000, to: 20_300 });
    const control = nimhBench();
    for (const x of [b, control]) {
      x.start();
      x.run(40_000);
    }
    expect(b.session.state).toBe('discharging');
    expect(b.session.plausibility.implausibleFrames).toBe(3);
    // Charge is the time integral of current (physics): a constant 0.5 A gives the same charge
    // whether three frames were bridged or not.
    expect(b.session.integrator.chargeAh).toBeCloseTo(control.session.integrator.chargeAh, 12);
    expect(b.session.integrator.bridgedAh).toBeCloseTo((0.5 * 0.3) / 3600, 12);
    expect(control.session.integrator.energyWh).toBeCloseTo(b.session.integrator.energyWh, 12);
  });

  it('a current flowing into the cell with a resistive load on is implausible (physics: a load only draws)', () => {
    const b = nimhBench({ amps: -0.4 }, { from: 20_000, to: 40_000 });
    b.start();
    b.run(60_000, () => b.session.state === 'ended');
    expect(b.end).toMatchObject({ reason: 'implausible_reading' });
    expect(b.end!.detail).toContain('flows into the cell');
    // Nothing taken off the charge: it only grew, at 0.5 A, until the bad frames began.
    expect(b.session.integrator.chargeAh).toBeGreaterThan(0);
    expect(b.session.integrator.chargeAh).toBeLessThanOrEqual((0.5 * 22.3) / 3600);
  });
});

describe('open load: the load on, no current', () => {
  it('an uncalibrated channel reading 0.03 A both with the load off and on (a blown fuse): alarm after 3 s, end after 10 s as open_load', () => {
    const b = new Bench(nimhSettings());
    let blown = false;
    b.reading = (t, on) => {
      if (on && t >= 20_000) blown = true;
      return {
        volts: on && !blown ? 1.25 : 1.3,
        // The channel's offset: 30 mA read whatever flows; 0.5 A more with the load drawing.
        amps: 0.03 + (on && !blown ? 0.5 : 0),
        celsius: 25,
        thermistor: 'ok',
        flags: 0,
      };
    };
    b.start();
    b.run(60_000, () => b.session.state === 'ended');
    const alarm = b.actions.find((a) => a.action.type === 'event' && a.action.name === 'open_load');
    expect(alarm?.at).toBeGreaterThanOrEqual(23_000);
    expect(alarm?.at).toBeLessThanOrEqual(23_300);
    expect(b.end).toMatchObject({ reason: 'open_load' });
    expect(b.loadCommands(false)[0]).toBeGreaterThanOrEqual(30_000);
    expect(b.loadCommands(false)[0]).toBeLessThanOrEqual(30_300);
    expect(exitCodeFor('open_load', false)).toBe(3);
  });

  it('a short dip to no current (under 3 s) raises nothing', () => {
    const b = nimhBench({ amps: 0 }, { from: 20_000, to: 22_500 });
    b.start();
    b.run(40_000);
    expect(b.events('open_load')).toHaveLength(0);
    expect(b.session.state).toBe('discharging');
  });

  it('a low but real current is not open: 30 mA (an LR6 on 43 Ω, IEC 60086-2, from memory) on a rig of 1.3 mA a count', () => {
    const b = nimhBench({ amps: 0.03 }, { from: 0, to: Infinity });
    b.start();
    b.run(60_000);
    expect(b.events('open_load')).toHaveLength(0);
    expect(b.session.state).toBe('discharging');
  });

  it('the load switched off by a schedule is not an open load', () => {
    const schedule = parseScheduleOption('on 5 s every 20 s');
    const b = nimhBench({}, undefined, nimhSettings({ schedule }));
    b.start();
    b.run(120_000);
    expect(b.loadCommands(false).length).toBeGreaterThanOrEqual(5);
    expect(b.events('open_load')).toHaveLength(0);
    expect(b.session.state).toBe('discharging');
  });
});
