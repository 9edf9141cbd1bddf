import { describe, expect, it } from 'vitest';
import {
  DcResistanceTracker,
  loadStepResistance,
  twoLevelResistance,
  type ResistanceSample,
} from '../../src/report/dc-resistance.js';

/** A cell as the handbook draws it: an open-circuit voltage behind a resistance. */
function frames(
  ocv: number,
  ohm: number,
  plan: Array<{ seconds: number; amps: number }>,
  periodS = 0.1,
): ResistanceSample[] {
  const out: ResistanceSample[] = [];
  let t = 0;
  for (const step of plan) {
    for (let i = 0; i < Math.round(step.seconds / periodS); i++) {
      out.push({
        hostS: Number(t.toFixed(3)),
        volts: ocv - step.amps * ohm,
        amps: step.amps,
        loadOn: step.amps > 0,
      });
      t += periodS;
    }
  }
  return out;
}

function track(samples: ResistanceSample[]): ReturnType<DcResistanceTracker['result']> {
  const t = new DcResistanceTracker();
  for (const s of samples) t.add(s);
  return t.result();
}

describe('DC internal resistance', () => {
  it('open-circuit / loaded form R = (U_open − U_load) / I_load (IEC 61951-2, IEC 61960-3)', () => {
    expect(loadStepResistance(4.0, 3.9, 2.0)).toBeCloseTo(0.05, 12);
  });

  it('two-level form R = (U1 − U2) / (I2 − I1) (IEC 61951-2, IEC 61960-3)', () => {
    // 40 mΩ behind 3.70 V; a 2.5 Ah cell: I1 = 0.2 It = 0.5 A, I2 = 1 It = 2.5 A.
    const u1 = 3.7 - 0.5 * 0.04;
    const u2 = 3.7 - 2.5 * 0.04;
    expect(twoLevelResistance(u1, 0.5, u2, 2.5)).toBeCloseTo(0.04, 12);
  });

  it('reads the resistance at switch-on and from the recovery at switch-off of a constructed step', () => {
    const r = track(
      frames(4.0, 0.05, [
        { seconds: 2, amps: 0 },
        { seconds: 30, amps: 2 },
        { seconds: 3, amps: 0 },
      ]),
    );
    expect(r.switch_on!.count).toBe(1);
    expect(r.switch_on!.first.ohm).toBeCloseTo(0.05, 9);
    expect(r.switch_on!.first.uBeforeV).toBeCloseTo(4.0, 12);
    expect(r.switch_off!.first.ohm).toBeCloseTo(0.05, 9);
    expect(r.two_level).toBeUndefined();
  });

  it('follows the two-level method on a constructed 0.2 It for 10 s then 1 It for 1 s sequence', () => {
    const plan = [
      { seconds: 2, amps: 0 },
      { seconds: 10, amps: 0.5 },
      { seconds: 1, amps: 2.5 },
      { seconds: 10, amps: 0.5 },
      { seconds: 1, amps: 2.5 },
      { seconds: 2, amps: 0 },
    ];
    const r = track(frames(3.7, 0.04, plan));
    const two = r.two_level!;
    expect(two.count).toBe(2);
    expect(two.first.ohm).toBeCloseTo(0.04, 9);
    expect(two.first.iBeforeA).toBe(0.5);
    expect(two.first.iAfterA).toBe(2.5);
    expect(two.first.dwellS).toBeCloseTo(10, 6);
    expect(two.last.ohm).toBeCloseTo(0.04, 9);
  });

  it('reads U2 one second into a longer higher level, as the method does', () => {
    // The open-circuit voltage sags 10 mV a second under the higher current: the reading is the one at 1 s.
    const samples = frames(3.7, 0.04, [
      { seconds: 10, amps: 0.5 },
      { seconds: 5, amps: 2.5 },
    ]).map((s) => (s.hostS > 10 ? { ...s, volts: s.volts - 0.01 * (s.hostS - 10) } : s));
    const r = track(samples);
    const oneSecond = 3.7 - 2.5 * 0.04 - 0.01 * 1.0;
    expect(r.two_level!.first.uAfterV).toBeCloseTo(oneSecond, 6);
  });

  it('current noise of a few percent is not taken for a second load level', () => {
    const noisy = frames(3.7, 0.04, [
      { seconds: 1, amps: 0 },
      { seconds: 30, amps: 1 },
    ]).map((s, i) => (s.loadOn ? { ...s, amps: s.amps * (1 + 0.03 * Math.sin(i)) } : s));
    expect(track(noisy).two_level).toBeUndefined();
  });
});
