import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { packagePath } from '../../src/core/paths.js';
import { loadProgram } from '../../src/program/program-file.js';
import { planProgram } from '../../src/program/program-plan.js';
import type { ChannelMode, Intent, ProgramFrame } from '../../src/program/sequence-types.js';
import { ProgramSequencer } from '../../src/program/sequencer.js';
import { capacityTrend, type SegmentCapacity } from '../../src/report/cycle-trend.js';

/*
 * The shipped capacity-check program driven through a toy cell: 2.5 Ah, open-circuit voltage
 * linear in state of charge from 3.0 V (empty) to 4.2 V (full), 50 mΩ in series; an ideal rig
 * that takes every intent. Hand-worked: a CC-CV charge to 4.2 V ends at 0.125 A with the OCV at
 * 4.2 − 0.125 × 0.05 = 4.19375 V, SoC 0.994792; a 0.5 A discharge ends at 3.0 V loaded, OCV
 * 3.025 V, SoC 0.020833; each cycle gives (0.994792 − 0.020833) × 2.5 = 2.43490 Ah. Storage then
 * charges at 1.25 A until the voltage under charge reaches 3.8 V: OCV 3.8 − 1.25 × 0.05 =
 * 3.7375 V, SoC 0.614583.
 */
class ToyRig {
  soc = 0.5;
  mode: ChannelMode = 'rest';
  private chargeA = 0;
  private cvV = 0;
  private loadA = 0;
  private readonly ah = 2.5;
  private readonly r = 0.05;

  ocv(): number {
    return 3.0 + 1.2 * this.soc;
  }

  apply(intents: readonly Intent[]): void {
    for (const i of intents) {
      if (i.type === 'set-mode') this.mode = i.mode;
      else if (i.type === 'set-charge') [this.chargeA, this.cvV] = [i.currentA, i.voltageV];
      else if (i.load.type === 'constant_current') this.loadA = i.load.A;
    }
  }

  /** Advances dt seconds; returns the signed current (+ out of the cell). */
  step(dtS: number): number {
    let i = 0;
    if (this.mode === 'discharge') i = this.loadA;
    if (this.mode === 'charge') i = -Math.min(this.chargeA, (this.cvV - this.ocv()) / this.r);
    this.soc -= (i * dtS) / 3600 / this.ah;
    return i;
  }

  frame(t_s: number, i: number): ProgramFrame {
    return {
      t_ms: t_s * 1000,
      voltageV: this.ocv() - i * this.r,
      currentA: i,
      temperatureC: 23,
      mode: this.mode,
    };
  }
}

describe('the capacity-check program on a toy cell', () => {
  it('runs 13 segments in order, three cycles of 2.4349 Ah, and ends at the storage voltage', async () => {
    const file = await loadProgram(packagePath(join('config', 'programs', 'capacity-check.yaml')));
    const plan = planProgram(file, {
      profile: findChemistry(loadChemistries(), 'li-ion'),
      cells: 1,
      where: 'x',
    });
    const rig = new ToyRig();
    const seq = new ProgramSequencer(plan);
    const dt = 1;
    let i = 0;
    const chargeOut = new Map<number, number>();
    for (let t = 0; t < 40 * 3600 && seq.state !== 'complete' && seq.state !== 'aborted'; t += dt) {
      const u = seq.onFrame(rig.frame(t, i));
      rig.apply(u.intents);
      i = rig.step(dt);
      const seg = seq.current;
      if (seg !== null && i > 0)
        chargeOut.set(seg.index, (chargeOut.get(seg.index) ?? 0) + (i * dt) / 3600);
    }
    expect(seq.state).toBe('complete');
    const segs = seq.segments;
    expect(segs.map((s) => s.kind).join(',')).toBe(
      [...Array<string>(3).fill('charge,rest,discharge,rest'), 'charge'].join(','),
    );
    expect(segs.map((s) => s.end_reason)).toEqual([
      ...Array<string[]>(3)
        .fill(['termination_current', 'rest_time', 'cutoff', 'rest_time'])
        .flat(),
      'storage_voltage',
    ]);
    expect(segs.at(-1)!.purpose).toBe('storage');
    expect(rig.soc).toBeCloseTo(0.614583, 3);

    const trend = capacityTrend(
      segs.map((s): SegmentCapacity => ({ segment: s, capacityAh: chargeOut.get(s.index) ?? 0 })),
    );
    expect(trend.points.map((p) => p.cycle)).toEqual([1, 2, 3]);
    // 1 s frames at 0.5 A: one frame is 0.14 mAh, so 1 mAh covers the discretisation
    for (const p of trend.points) expect(Math.abs(p.capacityAh - 2.4349)).toBeLessThan(0.001);
    expect(Math.abs(trend.slopeAhPerCycle!)).toBeLessThan(1e-4);
  });
});
