import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { TruthRecorder } from '../../src/sim/truth.js';
import { BENCH_PROFILE, harness, IdealSource, simpleRig } from './helpers.js';

describe('truth record', () => {
  it('physics: a constant 1 A for 10 min is 1 A × 600 s / 3600 s/h = 166.7 mAh', () => {
    const rec = new TruthRecorder();
    const p = { currentA: 1, terminalV: 2 };
    for (let k = 0; k < 60_000; k++) rec.add(0.01, p, p, true);
    expect(rec.chargeAh * 1000).toBeCloseTo(166.667, 2);
    expect(rec.energyWh).toBeCloseTo(0.3333, 4);
    expect(rec.loadOnS).toBeCloseTo(600, 6);
  });

  it('physics: the rig drawing a steady 1 A for 10 min of sim time records 166.7 mAh', () => {
    const clock = new VirtualClock();
    // 1 V across a 1 Ω loop (load + shunt, no MOSFET or cell resistance) is 1 A.
    const rig = simpleRig(clock, {
      cell: new IdealSource(1),
      loadOhm: 1 - BENCH_PROFILE.current.shunt_ohm,
      mosfetOhm: 0,
    });
    const h = harness(rig, clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    for (let s = 0; s < 600; s++) {
      clock.advance(1000);
      h.send({ command: 'BEAT' });
    }
    h.send({ command: 'LOAD', channel: 0, on: false });
    clock.advance(5000);
    const t = rig.truth();
    expect(t.currentA).toBe(0);
    expect(t.chargeAh * 1000).toBeCloseTo(166.667, 2);
    expect(t.loadOnS).toBeCloseTo(600, 6);
    expect(t.elapsedS).toBeCloseTo(605, 6);
  });

  it("fact of the trade (Ohm's law): 1.5 V across 15 Ω is 100 mA", () => {
    const clock = new VirtualClock();
    const rig = simpleRig(clock, {
      cell: new IdealSource(1.5),
      loadOhm: 15 - BENCH_PROFILE.current.shunt_ohm,
      mosfetOhm: 0,
    });
    const h = harness(rig, clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(500);
    expect(rig.truth().currentA).toBeCloseTo(0.1, 9);
  });

  it("a cell resistance drops the terminal voltage by I·R (physics: Ohm's law)", () => {
    const clock = new VirtualClock();
    const cell = new IdealSource(4);
    cell.internalOhm = () => 0.1;
    const rig = simpleRig(clock, { cell, loadOhm: 1.88, mosfetOhm: 0 });
    const h = harness(rig, clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(100);
    const t = rig.truth();
    expect(t.currentA).toBeCloseTo(2, 9); // 4 V / (1.88 + 0.02 + 0.1) Ω
    expect(t.terminalV).toBeCloseTo(3.8, 9);
  });
});
