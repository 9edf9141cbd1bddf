/**
 * The physics of the simulated 1.1 rig against handbook facts: the CC-CV charge of a Li-ion
 * cell, the charge put in against the integral of the current, the terminal voltage above the
 * open-circuit voltage by I·R while charging, and a constant-current load holding its current.
 */
import { describe, expect, it } from 'vitest';
import { raw, rig11, SIM_CC_PROFILE } from './helpers11.js';

const VREF = SIM_CC_PROFILE.adc.vref_V;
const FULL = 2 ** SIM_CC_PROFILE.adc.bits;
/** Amps a count of the charger monitor reads (the profile's monitor_A_per_V over the ADC). */
const MONITOR_A_PER_COUNT = (VREF / FULL) * SIM_CC_PROFILE.charger!.monitor_A_per_V;
/** Amps a count of the load's current input reads (shunt into its amplifier). */
const LOAD_A_PER_COUNT =
  VREF / FULL / (SIM_CC_PROFILE.current.shunt_ohm * SIM_CC_PROFILE.current.amplifier_gain!);

interface Sample {
  s: number;
  currentA: number;
  terminalV: number;
  ocvV: number;
  tempC: number;
  phase: string;
}

/** Charges a cycling scenario's cell for up to `maxS` seconds, sampling the truth every second. */
function charge(name: string, maxS: number) {
  const r = rig11(name);
  r.send(raw('MODE,0,C'));
  const samples: Sample[] = [];
  r.run(maxS, () => {
    const t = r.rig.truth();
    const phase = r.rig.truth11().chargePhase;
    samples.push({
      s: samples.length + 1,
      currentA: -t.currentA,
      terminalV: t.terminalV,
      ocvV: t.openCircuitV,
      tempC: t.temperatureC,
      phase,
    });
    return phase === 'done';
  });
  return { r, samples };
}

describe('CC-CV charge of a Li-ion cell (cc-quick: 25 mA to 4.2 V, ends at 5 mA)', () => {
  const { r, samples } = charge('cc-quick', 4 * 3600);
  const cvAt = samples.findIndex((x) => x.phase === 'cv');
  const cc = samples.slice(0, cvAt);
  const cv = samples.slice(cvAt).filter((x) => x.phase === 'cv');

  // Common practice (handbook CC-CV charge of Li-ion): constant current until the cell reaches
  // the charge voltage, then constant voltage with the current falling to the termination.
  it('holds the set current until the terminal voltage reaches the charge voltage', () => {
    expect(cvAt).toBeGreaterThan(600);
    for (const x of cc) {
      expect(x.currentA).toBeCloseTo(0.025, 6);
      expect(x.terminalV).toBeLessThanOrEqual(4.2 + 1e-9);
    }
    expect(cc.at(-1)!.terminalV).toBeGreaterThan(4.19);
  });

  it('then holds 4.2 V with the current falling, and terminates below 5 mA', () => {
    for (const x of cv) expect(x.terminalV).toBeCloseTo(4.2, 6);
    for (let k = 60; k < cv.length; k += 60)
      expect(cv[k]!.currentA).toBeLessThan(cv[k - 60]!.currentA);
    expect(samples.at(-1)!.phase).toBe('done');
    expect(cv.at(-1)!.currentA).toBeGreaterThanOrEqual(0.005);
    expect(r.rig.truth().currentA).toBe(0);
    // Common practice: a full Li-ion charge ends near full charge (here within 2 %).
    expect(r.rig.truth().stateOfCharge).toBeGreaterThan(0.98);
  });

  // Common practice, figures from memory: the constant-current phase of a Li-ion CC-CV charge
  // ends well before full (at about 70–90 % of capacity at moderate rates), the
  // constant-voltage phase adds the rest.
  it('the constant-current phase ends short of full charge', () => {
    const socAtCv = 0.5 + (cvAt * 0.025) / 3600 / 0.05;
    expect(socAtCv).toBeGreaterThan(0.7);
    expect(socAtCv).toBeLessThan(0.95);
  });

  // Ohm's law: charging, the terminal sits above the open-circuit voltage by the current times
  // the internal resistance (0.5 Ω at 25 °C here, a little less warm), plus polarisation.
  it('the terminal voltage is above the open-circuit voltage by at least I·R', () => {
    const x = cc[300]!;
    const rise = x.terminalV - x.ocvV;
    expect(rise).toBeGreaterThan(0.025 * 0.5 * 0.9);
    expect(rise).toBeLessThan(0.025 * (0.5 + 4) * 1.1);
  });

  // Joule heating, I²R: 25 mA through 0.5 Ω is about 0.3 mW, a few hundredths of a kelvin
  // over 0.02 W/K: the cell warms a little, never more than a kelvin.
  it('warms the cell a little', () => {
    const rise = Math.max(...samples.map((x) => x.tempC)) - 22;
    expect(rise).toBeGreaterThan(0);
    expect(rise).toBeLessThan(1);
  });

  // Coulomb counting (charge = ∫ I dt): the host's integral of the monitor readings, the
  // charge the cell took in, and its rise in state of charge agree.
  it('the charge put in equals the integral of the monitored current and the rise in charge', () => {
    const frames = r.frames().filter((f) => f.flags === 0x18);
    const periodS = 0.5;
    const hostAh = frames.reduce((a, f) => a + f.iRaw * MONITOR_A_PER_COUNT * periodS, 0) / 3600;
    const truth = r.rig.truth11().chargedAh;
    const socRise = (r.rig.truth().stateOfCharge - 0.5) * 0.05;
    expect(truth).toBeCloseTo(socRise, 6);
    // Readings are floored to a count of 0.61 mA: about 0.3 mA (1.2 % of 25 mA) low on average.
    // The tail of the charge, read in few counts, is floored hardest; within 3 % in all.
    expect(Math.abs(hostAh - truth) / truth).toBeLessThan(0.03);
  });
});

describe('charging faults of the cycling scenarios', () => {
  it('cc-no-end: a cell that leaks more than the termination current never ends its charge', () => {
    const { r, samples } = charge('cc-no-end', 8 * 3600);
    expect(samples.at(-1)!.phase).toBe('cv');
    expect(samples.at(-1)!.currentA).toBeGreaterThan(0.005);
    // Kirchhoff's current law: once the cell's charge stops rising, what the charger puts in
    // leaves through the short, so the charger's current settles at the leak.
    expect(samples.at(-1)!.currentA).toBeCloseTo(0.008, 3);
    expect(r.rig.truth().terminalV).toBeCloseTo(4.2, 6);
  });

  // Common practice (makers' datasheets, from memory): Li-ion is charged between 0 and 45 °C;
  // this cell passes 45 °C while charging, for a host's charge-temperature window to catch.
  it('cc-hot-charge: the charger module heats the cell past 45 °C within three minutes', () => {
    const { samples } = charge('cc-hot-charge', 600);
    const at = samples.findIndex((x) => x.tempC > 45);
    expect(at).toBeGreaterThan(30);
    expect(at).toBeLessThan(180);
  });
});

describe('constant-current discharge (cc-quick: 50 mA, 1 C)', () => {
  // Stated tolerance of the simulated load: within ±1 % and 2 mA of the setpoint's current
  // (the trim's residual 0.2 % plus ripple), held from full to 3.0 V.
  it('holds the current within ±1 % + 2 mA across the discharge to 3.0 V', () => {
    const r = rig11('cc-quick');
    r.send(raw('MODE,0,C'));
    r.run(6 * 3600, () => r.rig.truth11().chargePhase === 'done');
    r.send(raw('ISET,0,82'));
    r.send(raw('MODE,0,D'));
    const set = r.rig.truth11().targetA;
    // 82 counts at 0.61 mA a count, read mid-count: the current the rig's trim closes on.
    expect(set).toBeGreaterThan(81 * LOAD_A_PER_COUNT - 0.003);
    expect(set).toBeLessThan(83 * LOAD_A_PER_COUNT);
    const currents: number[] = [];
    r.run(2 * 3600, () => {
      const t = r.rig.truth();
      if (t.terminalV < 3.0) return true;
      currents.push(t.currentA);
      return false;
    });
    expect(currents.length).toBeGreaterThan(2400);
    for (const i of currents) expect(Math.abs(i - set)).toBeLessThan(0.01 * set + 0.002);
    const frames = r.frames().filter((f) => f.flags === 0x05);
    const mean = frames.reduce((a, f) => a + f.iRaw, 0) / frames.length;
    expect(Math.abs(mean - 82)).toBeLessThan(1.5);
  });

  it('a cell that can no longer drive the setpoint: flag bit 5, and the current falls', () => {
    const r = rig11('cc-quick');
    // 1 A (20 C) from a 50 mAh cell: held at first, until the cell's polarisation grows and
    // its EMF can no longer drive 1 A through the source resistor, MOSFET, shunt and itself.
    r.send(raw('ISET,0,1638'));
    r.send(raw('MODE,0,D'));
    r.run(2);
    expect(r.rig.truth11().setpointNotHeld).toBe(false);
    expect(r.frames().at(-1)!.flags).toBe(0x05);
    const lostAt = r.run(120, () => r.rig.truth11().setpointNotHeld);
    expect(lostAt).toBeLessThan(120);
    const held = r.rig.truth11().targetA;
    r.run(10);
    const t = r.rig.truth();
    expect(t.currentA).toBeLessThan(held);
    // Ohm's law with the MOSFET fully on: the terminal voltage is the current through the
    // source resistor (1 Ω), MOSFET (0.02 Ω), shunt (0.1 Ω) and wiring (1 % of the shunt).
    expect(t.terminalV).toBeCloseTo(t.currentA * (1.0 + 0.02 + 0.1 + 0.001), 9);
    expect(r.frames().at(-1)!.flags).toBe(0x25);
  });
});
