import { describe, expect, it } from 'vitest';
import { FLAG_RIG_FAULT } from '../../src/protocol/messages.js';
import { CUTOFF_HOLD_MS } from '../../src/session/limits.js';
import { Session } from '../../src/session/session.js';
import { Bench, LI_ION, liIonSettings, type Reading } from './bench.js';

// Limits of one Li-ion cell from config/chemistries.yaml: cutoff 3.0 V, floor 2.5 V and 60 °C
// (all "common practice"); full charge 4.20 V (common practice).

describe('session: start', () => {
  it('waiting -> precheck -> starting -> discharging; the load goes on only after a passed precheck', () => {
    const b = new Bench();
    b.start();
    expect(b.states()).toEqual(['waiting', 'precheck', 'starting', 'discharging']);
    const precheckAt = b.actions.find(
      ({ action }) => action.type === 'event' && action.name === 'precheck_passed',
    )!.at;
    expect(precheckAt).toBeGreaterThanOrEqual(1000); // 1 s of resting frames by default
    expect(b.loadCommands(true)).toEqual([precheckAt]);
    expect(b.session.openCircuitV).toBeCloseTo(4.0, 12);
  });

  it('DC internal resistance from the first loaded frame: (4.00 − 3.90) V / 1 A = 0.1 Ω (IEC 61951-2, IEC 61960-3: open-circuit/loaded form; from memory)', () => {
    const b = new Bench();
    b.start();
    expect(b.session.dcResistanceOhm).toBeCloseTo(0.1, 12);
    expect(b.events('load_on')[0]).toMatchObject({
      open_circuit_V: 4,
      loaded_V: 3.9,
      current_A: 1,
    });
  });

  it('refuses a resting voltage checkRest rejects: a Li-ion cell at 4.35 V is above 4.25 V (4.20 V full charge, common practice)', () => {
    const b = new Bench();
    b.reading = () => ({ volts: 4.35, amps: 0, celsius: 25, thermistor: 'ok', flags: 0 });
    b.run(10_000);
    expect(b.end).toMatchObject({ type: 'end', reason: 'refused', loadOffConfirmed: true });
    expect(b.end!.detail).toMatch(/4\.35 V/);
    expect(b.loadCommands(true)).toEqual([]);
    expect(b.session.state).toBe('ended');
    expect(b.session.result.reason).toBeNull();
  });

  it('refuses a deeply discharged cell too (below the 2.0 V minimum rest, from memory)', () => {
    const b = new Bench();
    b.reading = () => ({ volts: 1.2, amps: 0, celsius: 25, thermistor: 'ok', flags: 0 });
    b.run(10_000);
    expect(b.end?.reason).toBe('refused');
    expect(b.loadCommands(true)).toEqual([]);
  });

  it.each<[string, Partial<Reading>]>([
    ['an open thermistor', { thermistor: 'open', celsius: Number.NaN }],
    ['a shorted thermistor', { thermistor: 'short', celsius: Number.NaN }],
    ['a cell above the temperature limit', { celsius: 61 }],
  ])('refuses to start with %s', (_name, r) => {
    const b = new Bench();
    b.reading = () => ({ volts: 4.0, amps: 0, celsius: 25, thermistor: 'ok', flags: 0, ...r });
    b.run(10_000);
    expect(b.end?.reason).toBe('refused');
    expect(b.loadCommands(true)).toEqual([]);
  });

  it('a rig silent for 5 s ends the run as refused without switching anything', () => {
    const b = new Bench();
    b.rig.talks = false;
    const at = b.run(10_000, () => b.session.state === 'ended');
    expect(at).toBeGreaterThan(5000);
    expect(at).toBeLessThanOrEqual(5100);
    expect(b.end?.detail).toMatch(/rig_silent/);
    expect(b.loadCommands(true)).toEqual([]);
  });

  it('a load found on at power-up is switched off before the precheck', () => {
    const b = new Bench();
    b.loadOn = true;
    b.start();
    expect(b.events('load_found_on')).toHaveLength(1);
    expect(b.loadCommands(false)[0]).toBeLessThan(b.loadCommands(true)[0]!);
  });

  it('a load never reported on ends the run as a fault, with LOAD 0 sent', () => {
    const b = new Bench();
    b.rig.obeys = false;
    b.run(20_000, () => b.session.state === 'ended');
    expect(b.session.result.reason).toBe('fault');
    expect(b.session.result.detail).toMatch(/load_not_confirmed/);
    expect(b.loadCommands(true).length).toBeGreaterThanOrEqual(2); // repeated before giving up
    expect(b.loadCommands(false).length).toBeGreaterThanOrEqual(1);
  });
});

describe('session: end of discharge with debounce', () => {
  function discharging(): Bench {
    const b = new Bench();
    b.start();
    b.run(5000);
    return b;
  }

  it('a single noisy frame below the cutoff does not end the run', () => {
    const b = discharging();
    const noisyAt = b.t + 1000;
    b.reading = (t, on) => ({
      volts: t === noisyAt ? 2.9 : on ? 3.9 : 4.0,
      amps: on ? 1 : 0,
      celsius: 25,
      thermistor: 'ok',
      flags: 0,
    });
    b.run(20_000);
    expect(b.session.state).toBe('discharging');
  });

  it('nor does a dip of two frames, nor one shorter than the debounce time', () => {
    const b = discharging();
    const t0 = b.t;
    // two frames low, then every other frame low for 5 s: never 1 s of consecutive frames
    b.reading = (t, on) => {
      const k = (t - t0) / 100;
      const low = k === 1 || k === 2 || (k > 20 && k < 70 && k % 2 === 0);
      return {
        volts: low ? 2.95 : on ? 3.9 : 4.0,
        amps: on ? 1 : 0,
        celsius: 25,
        thermistor: 'ok',
        flags: 0,
      };
    };
    b.run(20_000);
    expect(b.session.state).toBe('discharging');
  });

  it('a sustained crossing ends it within debounce + 1 s, sends LOAD 0 and waits for the load flag', () => {
    const b = discharging();
    const crossAt = b.t + 100;
    b.reading = (_t, on) => ({
      volts: on ? 2.98 : 3.3,
      amps: on ? 1 : 0,
      celsius: 25,
      thermistor: 'ok',
      flags: 0,
    });
    const stopAt = b.run(10_000, () => b.session.state === 'stopping');
    expect(stopAt).not.toBeNull();
    expect(stopAt! - crossAt).toBeGreaterThanOrEqual(CUTOFF_HOLD_MS);
    expect(stopAt! - crossAt).toBeLessThanOrEqual(CUTOFF_HOLD_MS + 1000);
    expect(b.loadCommands(false)).toEqual([stopAt]);
    b.step(); // the rig reports the load off
    expect(b.end).toMatchObject({ reason: 'cutoff', loadOffConfirmed: true });
    expect(b.session.result.reason).toBe('cutoff');
  });

  it('setCutoff refuses anything below the floor (2.5 V, common practice) and applies a valid one', () => {
    const b = discharging();
    expect(b.session.setCutoff(2.4)).toMatchObject({ ok: false });
    expect(b.session.setCutoff(Number.NaN)).toMatchObject({ ok: false });
    expect(b.session.setCutoff(Number.NEGATIVE_INFINITY)).toMatchObject({ ok: false });
    expect(b.session.cutoffV).toBe(3.0);
    expect(b.session.setCutoff(LI_ION.floor_V_per_cell.value)).toEqual({ ok: true });
    expect(b.session.cutoffV).toBe(2.5);
    // raised above the loaded 3.9 V: the run ends on it after the debounce
    expect(b.session.setCutoff(3.95)).toEqual({ ok: true });
    b.run(5000, () => b.session.state === 'ended');
    expect(b.session.result.reason).toBe('cutoff');
  });

  it('a session cannot even be built with a cutoff below the floor', () => {
    expect(() => new Session(liIonSettings({ cutoffV: 2.0 }))).toThrow(/floor/);
  });

  it('a cutoff exactly at the floor of a string is not refused for floating-point dust (3 × 0.8 V = 2.4 V)', () => {
    const floorV = 3 * 0.8; // 2.4000000000000004 in binary floating point (IEEE 754 doubles)
    expect(floorV).toBeGreaterThan(2.4);
    const s = new Session(liIonSettings({ floorV, cutoffV: 2.4 }));
    expect(s.setCutoff(2.4)).toEqual({ ok: true });
    expect(s.setCutoff(2.399)).toMatchObject({ ok: false });
  });

  it('charge counts only with the load on: 1 A for 10 min of discharge is 166.7 mAh (physics)', () => {
    const b = new Bench();
    b.start();
    const q0 = b.session.integrator.chargeAh; // half a step at the switching edge
    b.run(600_000);
    expect((b.session.integrator.chargeAh - q0) * 1000).toBeCloseTo(166.667, 3);
  });
});

describe('session: safety trips', () => {
  const trips: [string, (r: Reading) => Reading, string, RegExp][] = [
    [
      'over-temperature',
      (r) => ({ ...r, celsius: 62 }),
      'over_temperature',
      /above the limit of 60/,
    ],
    [
      'thermistor open',
      (r) => ({ ...r, thermistor: 'open', celsius: Number.NaN }),
      'fault',
      /thermistor_open/,
    ],
    [
      'thermistor short',
      (r) => ({ ...r, thermistor: 'short', celsius: Number.NaN }),
      'fault',
      /thermistor_short/,
    ],
    ['over-current', (r) => ({ ...r, amps: 6 }), 'fault', /over_current/],
    ['rig fault flag', (r) => ({ ...r, flags: FLAG_RIG_FAULT }), 'fault', /rig_fault/],
  ];

  it.each(trips)(
    '%s stops the run within 3 frames, sends LOAD 0 and waits for the confirmation',
    (_n, bad, reason, detail) => {
      const b = new Bench();
      b.start();
      b.run(2000);
      const healthy = b.reading;
      b.reading = (t, on) => bad(healthy(t, on));
      b.rig.obeys = false; // hold the load on: the session must wait
      const from = b.t;
      const stopAt = b.run(5000, () => b.session.state === 'stopping');
      expect(stopAt! - from).toBeLessThanOrEqual(300);
      expect(b.loadCommands(false)).toEqual([stopAt]);
      b.run(900);
      expect(b.session.state).toBe('stopping');
      b.loadOn = false; // the rig finally reports the load off
      b.step();
      expect(b.end).toMatchObject({ reason, loadOffConfirmed: true });
      expect(b.end!.detail).toMatch(detail);
    },
  );

  it('an acknowledgement A,LOAD,<ch>,0 confirms the stop as well as the load flag', () => {
    const b = new Bench();
    b.start();
    b.rig.obeys = false;
    b.rig.acks = true;
    b.session.setCutoff(3.95);
    b.run(5000, () => b.session.state === 'ended');
    expect(b.end).toMatchObject({ reason: 'cutoff', loadOffConfirmed: true });
    expect(b.loadOn).toBe(true); // confirmed by the ack alone
  });

  it('an acknowledgement for another channel does not confirm', () => {
    const b = new Bench();
    b.start();
    b.rig.obeys = false;
    b.take(b.session.requestStop(b.t, 'test'));
    b.take(b.session.ack('LOAD', ['1', '0']));
    expect(b.session.state).toBe('stopping');
  });

  it('the acknowledgement that ends the run gives the integrator the window of the switch-off: from the last frame to its arrival (a = I × window, for the budget)', () => {
    const b = new Bench();
    b.start();
    // Switched on between two frames 100 ms apart at 1 A: a = 1 A × 50 ms, placed mid-step.
    expect(b.session.integrator.switches.count).toBe(1);
    b.rig.obeys = false;
    b.take(b.session.requestStop(b.t, 'test'));
    b.take(b.session.ack('LOAD', ['0', '0'], b.t + 6));
    expect(b.end).toMatchObject({ loadOffConfirmed: true });
    const s = b.session.integrator.switches;
    expect(s.count).toBe(2);
    expect(s.sumSqHalfWidthAh).toBeCloseTo((0.05 / 3600) ** 2 + (0.006 / 3600) ** 2, 18);
  });

  it('a load off never confirmed: LOAD 0 repeated, then the run ends unconfirmed (the rig watchdog is the last defence)', () => {
    const b = new Bench();
    b.start();
    b.rig.obeys = false;
    b.take(b.session.requestStop(b.t, 'test'));
    b.run(10_000, () => b.session.state === 'ended');
    expect(b.loadCommands(false).length).toBeGreaterThanOrEqual(2);
    expect(b.end).toMatchObject({ reason: 'stopped', loadOffConfirmed: false });
    expect(b.events('load_off_unconfirmed')).toHaveLength(1);
  });

  it('the load dropping without a command is a fault', () => {
    const b = new Bench();
    b.start();
    b.loadOn = false;
    b.run(2000, () => b.session.state === 'ended');
    expect(b.session.result.detail).toMatch(/load_dropped/);
    expect(b.end?.reason).toBe('fault');
  });

  it('a user stop: stopping, LOAD 0, ended as stopped once the load is off', () => {
    const b = new Bench();
    b.start();
    b.take(b.session.requestStop(b.t, 'the live page'));
    expect(b.session.state).toBe('stopping');
    b.step();
    expect(b.end).toMatchObject({
      reason: 'stopped',
      loadOffConfirmed: true,
      detail: 'stopped by the live page',
    });
  });

  it('a stop before the load is on ends at once and commands nothing', () => {
    const b = new Bench();
    b.run(300);
    b.take(b.session.requestStop(b.t, 'SIGINT'));
    expect(b.end?.reason).toBe('stopped');
    expect(b.loadCommands(true)).toEqual([]);
  });
});

describe('session: link and heartbeat', () => {
  it('a stale link while discharging ends as link_lost, with LOAD 0 sent', () => {
    const b = new Bench();
    b.start();
    b.run(2000);
    const lastFrame = b.t;
    b.rig.talks = false;
    const stopAt = b.run(10_000, () => b.session.state === 'stopping');
    expect(stopAt! - lastFrame).toBeGreaterThan(3000);
    expect(stopAt! - lastFrame).toBeLessThanOrEqual(3100);
    expect(b.loadCommands(false)).toEqual([stopAt]);
    b.run(10_000, () => b.session.state === 'ended');
    // nothing can confirm over a dead link
    expect(b.end).toMatchObject({ reason: 'link_lost', loadOffConfirmed: false });
  });

  it('a stale link that comes back in time to confirm the stop ends confirmed', () => {
    const b = new Bench();
    b.start();
    b.rig.talks = false;
    b.run(10_000, () => b.session.state === 'stopping');
    b.rig.talks = true;
    b.step();
    expect(b.end).toMatchObject({ reason: 'link_lost', loadOffConfirmed: true });
  });

  it('a stale link during the precheck ends the run before anything is switched', () => {
    const b = new Bench();
    b.run(300);
    b.rig.talks = false;
    b.run(10_000, () => b.session.state === 'ended');
    expect(b.end?.reason).toBe('link_lost');
    expect(b.loadCommands(true)).toEqual([]);
  });

  it('heartbeats go out at least once a second while the load may be on (protocol v1)', () => {
    const b = new Bench();
    b.start();
    const loadAt = b.loadCommands(true)[0]!;
    b.run(60_000);
    const beats = b.beats();
    expect(beats[0]).toBe(loadAt); // with the LOAD 1, not after it
    const gaps = beats.slice(1).map((t, k) => t - beats[k]!);
    expect(Math.max(...gaps)).toBeLessThanOrEqual(1000);
    expect(beats.at(-1)).toBeGreaterThan(b.t - 1000);
    expect(beats.filter((t) => t < loadAt)).toEqual([]);
  });

  it('heartbeats stop once the session stops the load, so a lost LOAD 0 still meets the rig watchdog', () => {
    const b = new Bench();
    b.start();
    b.rig.obeys = false;
    b.take(b.session.requestStop(b.t, 'test'));
    const stopAt = b.t;
    b.run(3000);
    expect(b.beats().filter((t) => t > stopAt)).toEqual([]);
  });
});
