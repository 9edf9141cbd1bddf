import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { SegmentLine } from '../../src/record/segments.js';
import type { CycleFigures, SegmentFigures } from '../../src/record/result.js';
import { readSegments } from '../../src/record/segments.js';
import { calibrateFromTruth } from './calibrate-from-truth.js';
import {
  CC_RIG_PROFILE,
  programFixture,
  startCcHarness,
  type CcHarness,
  type CcTruth,
} from './cc-rig.js';
import { daemonOnRig, finishedRun, type FinishedRun } from './daemon-on-rig.js';

interface Result {
  end_reason: string;
  program: string;
  segments: SegmentFigures[];
  cycles: CycleFigures[];
}

// A whole program run, end to end: `cellvigil run --program` on the CC variant of the reference
// firmware, on the emulated chip in real time, channel 1 calibrated first the documented way.
// The cell holds 0.5 mAh and starts half charged: the rig's charger (100 mA, its programmed
// current, as config/rigs/cv328-cc.yaml says) fills it in seconds, and a 0.1 A discharge empties
// it in about 18 s. Li-ion: charge to 4.2 V, end of discharge 3.0 V (common practice).
const CHANNEL = 1;
const DISCHARGE_A = 0.1;
const CUTOFF_V = 3.0;

describe('reference firmware (CC variant) on an emulated chip: a program’s charge, rest and discharge', () => {
  let rig: CcHarness;
  let run: FinishedRun<Result, CcTruth>;
  let segments: SegmentLine[];

  beforeAll(async () => {
    const cal = await calibrateFromTruth(CHANNEL, 29, 3);
    rig = await startCcHarness({ capacityMah: 0.5, soc: 0.5, seed: 29 });
    const program = programFixture('small-cell-cycle.yaml');
    const on = daemonOnRig(
      rig,
      ['--channel', String(CHANNEL), '--calibration', cal.file, '--program', program],
      { profile: CC_RIG_PROFILE },
    );
    run = await finishedRun<Result, CcTruth>(rig, on, on.start());
    segments = await readSegments(run.folder);
  }, 150_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('completes the program (exit 0) and records each step as a segment with its end', () => {
    expect(run.exitCode, run.output).toBe(0);
    expect(run.result.end_reason).toBe('program_complete');
    expect(run.result.program).toBe('Small cell, one cycle');
    expect(segments.map((s) => [s.kind, s.end_reason])).toEqual([
      ['charge', 'termination_current'],
      ['rest', 'rest_time'],
      ['discharge', 'cutoff'],
    ]);
    expect(run.result.segments.map((s) => s.index)).toEqual([0, 1, 2]);
    // The rest lasted its 0.1 min on the host's clock, give or take a frame (100 ms).
    const rest = segments[1]!;
    expect(rest.ended_ms - rest.started_ms).toBeGreaterThanOrEqual(6000);
    expect(rest.ended_ms - rest.started_ms).toBeLessThan(6300);
  });

  it('the rig did what the steps asked, in order, with a load and a charger never on together', () => {
    const ch = run.truth.channels[CHANNEL];
    const modes = ch.segments.map((s) => s.mode).filter((m, k, a) => k === 0 || a[k - 1] !== m);
    expect(modes).toEqual(['rest', 'charge', 'rest', 'discharge', 'rest']);
    expect(ch.segments.filter((s) => s.mode === 'charge').map((s) => s.phase)).toEqual([
      'cc',
      'cv',
      'done',
    ]);
    expect(ch.both_on_ms).toBe(0);
    expect(ch.charger_on).toBe(false);
    expect(ch.load_on).toBe(false);
  });

  it('the charge put in is the charger’s truth, within the monitor’s stated uncertainty (k = 2, GUM)', () => {
    const charge = run.result.segments[0]!;
    const truthAh = run.truth.channels[CHANNEL].charged_Ah;
    console.log(
      `charge in: ${(charge.charge_Ah * 1000).toFixed(4)} mAh recorded, ${(truthAh * 1000).toFixed(4)} mAh true, ` +
        `U = ${(charge.uncertainty.charge_Ah.expanded * 1000).toFixed(4)} mAh`,
    );
    expect(charge.kind).toBe('charge');
    expect(Math.abs(charge.charge_Ah - truthAh)).toBeLessThan(charge.uncertainty.charge_Ah.expanded);
  });

  it('the discharge held 0.1 A within 1 % (the standards’ tolerance on a controlled current, from memory) down to 3.0 V', () => {
    const d = run.truth.channels[CHANNEL].segments.find((s) => s.mode === 'discharge')!;
    expect(Math.abs(d.mean_A / DISCHARGE_A - 1)).toBeLessThan(0.01);
    const last = segments[2]!;
    expect(last.setpoint).toMatchObject({ current_A: DISCHARGE_A });
    expect(run.result.segments[2]!.end_voltage_V).toBeLessThanOrEqual(CUTOFF_V);
    expect(run.result.segments[2]!.end_voltage_V).toBeGreaterThan(CUTOFF_V - 0.05);
  });

  it('the cycle’s capacity is the charge the cell gave, within its stated uncertainty (∫ I dt, physics; k = 2, GUM)', () => {
    const truthAh = run.truth.channels[CHANNEL].charge_Ah;
    const cycle = run.result.cycles[0]!;
    console.log(
      `capacity: ${(cycle.capacity_Ah * 1000).toFixed(4)} mAh recorded, ${(truthAh * 1000).toFixed(4)} mAh true, ` +
        `U = ${(cycle.uncertainty.capacity_Ah.expanded * 1000).toFixed(4)} mAh`,
    );
    expect(run.result.cycles).toHaveLength(1);
    expect(cycle).toMatchObject({ cycle: 1, segment: 2 });
    expect(Math.abs(cycle.capacity_Ah - truthAh)).toBeLessThan(cycle.uncertainty.capacity_Ah.expanded);
  });
});
