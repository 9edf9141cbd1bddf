import { describe, expect, it } from 'vitest';
import { endOfProgram } from '../../src/program/program-end.js';
import { withProgram } from '../../src/report/program-result.js';
import { SegmentAccounting, type AccountedFrame } from '../../src/program/segment-accounting.js';
import type { RunResult } from '../../src/record/result.js';
import type { SegmentLine } from '../../src/record/segments.js';

const settings = {
  maxVolts: 5.3,
  ampsPerCount: 0.001,
  chargerAmpsPerCount: 0.0001,
  voltsPerCount: 0.0025,
  calibration: null,
};

function frame(over: Partial<AccountedFrame>): AccountedFrame {
  return { dtMs: 1000, gap: false, volts: 3.7, amps: 0.5, nominalA: 0.5, flags: 0x05, ...over };
}

function seg(over: Partial<SegmentLine>): SegmentLine {
  return {
    index: 0,
    kind: 'discharge',
    purpose: 'program',
    step: 'steps[0]',
    cycle: null,
    started_ms: 0,
    ended_ms: 3_600_000,
    end_reason: 'cutoff',
    setpoint: { cutoff_V: 3 },
    ...over,
  };
}

/** One hour of frames a second at a constant current and voltage. */
function hour(acc: SegmentAccounting, f: Partial<AccountedFrame>): void {
  acc.begin(frame({ ...f, dtMs: 0 }));
  for (let i = 0; i < 3600; i++) acc.add(frame(f));
}

describe('segment accounting', () => {
  // Charge = current × time (Q = I·t, physics): 0.5 A for 3600 s is 0.5 Ah; energy = V·I·t,
  // 3.7 V × 0.5 A × 1 h = 1.85 Wh.
  it('a constant 0.5 A discharge for one hour moved 0.5 Ah and 1.85 Wh at a mean 0.5 A', () => {
    const acc = new SegmentAccounting(settings);
    hour(acc, {});
    const fig = acc.close(seg({}));
    expect(fig.charge_Ah).toBe(0.5);
    expect(fig.energy_Wh).toBe(1.85);
    expect(fig.mean_current_A).toBe(0.5);
    expect(fig.duration_s).toBe(3600);
    expect(fig.end_voltage_V).toBe(3.7);
    expect(fig.uncertainty.charge_Ah.expanded).toBeGreaterThan(0);
  });

  // The same law into the cell: a charger's 0.25 A for an hour is 0.25 Ah moved, a magnitude.
  it('a charge counts the current into the cell as charge moved, never negative', () => {
    const acc = new SegmentAccounting(settings);
    hour(acc, { amps: -0.25, nominalA: 0.25, flags: 0x18, volts: 4.0 });
    const fig = acc.close(seg({ kind: 'charge', end_reason: 'termination_current' }));
    expect(fig.charge_Ah).toBe(0.25);
    expect(fig.energy_Wh).toBe(1);
  });

  it('integrates nothing at rest, and a frame whose flags cannot be true never', () => {
    const acc = new SegmentAccounting(settings);
    hour(acc, { flags: 0x00, amps: 0.002 });
    expect(acc.close(seg({ kind: 'rest', end_reason: 'rest_time' })).charge_Ah).toBe(0);
    const bad = new SegmentAccounting(settings);
    // 0x19: a load and a charger on together (docs/protocol.md, flags of 1.1).
    hour(bad, { flags: 0x19, amps: 5 });
    expect(bad.close(seg({})).charge_Ah).toBe(0);
  });

  it('starts each segment from zero, its first point the frame that ended the one before', () => {
    const acc = new SegmentAccounting(settings);
    hour(acc, {});
    acc.close(seg({}));
    acc.begin(frame({ dtMs: 0 }));
    acc.add(frame({ flags: 0x00, amps: 0 }));
    // Trapezoid from 0.5 A to 0 A over 1 s: 0.25 A·s.
    expect(acc.chargeAh).toBeCloseTo(0.25 / 3600, 12);
  });
});

describe("a program's end reason and result", () => {
  it('names the run end for each way a program ends', () => {
    const last = { index: 2, kind: 'charge' as const, step: 'steps[0]' };
    expect(endOfProgram({ aborted: false, reason: 'complete' }, last).reason).toBe(
      'program_complete',
    );
    expect(endOfProgram({ aborted: true, reason: 'charge_timeout' }, last).reason).toBe(
      'charge_timeout',
    );
    const f = endOfProgram({ aborted: true, reason: 'over_voltage' }, last);
    expect(f.reason).toBe('charge_fault');
    expect(f.detail).toContain('over_voltage');
    expect(f.detail).toContain('segment 2');
    expect(endOfProgram({ aborted: true, reason: 'over_temperature' }, last).reason).toBe(
      'over_temperature',
    );
  });

  // Least squares slope of (1, 1.00), (2, 0.98), (3, 0.96): -0.02 Ah per cycle (worked by hand).
  it('takes the top-level figures from the latest full cycle and fits the trend', () => {
    const acc = new SegmentAccounting(settings);
    const figs = [1.0, 0.98, 0.96].map((ah, i) => {
      hour(acc, { amps: ah, nominalA: ah });
      return acc.close(seg({ index: i, cycle: i + 1 }));
    });
    const base = { capacity_Ah: 9, cutoff_V: 3 } as unknown as RunResult;
    const r = withProgram(base, 'p', figs);
    // Each hour's first step runs from the last current of the hour before (one trapezoid of 1 s).
    expect(r.cycles!.map((c) => Number(c.capacity_Ah.toFixed(5)))).toEqual([1, 0.98, 0.96]);
    expect(r.capacity_Ah).toBe(r.cycles![2]!.capacity_Ah);
    expect(r.cycle_trend!.slope_Ah_per_cycle).toBeCloseTo(-0.02, 5);
    expect(r.cycles![2]!.of_first).toBeCloseTo(0.96, 5);
  });
});
