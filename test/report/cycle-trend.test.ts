import { linearRegression } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import { capacityTrend, type SegmentCapacity } from '../../src/report/cycle-trend.js';

const seg = (
  index: number,
  kind: 'charge' | 'rest' | 'discharge',
  cycle: number | null,
  capacityAh: number,
  over: Partial<SegmentCapacity['segment']> = {},
  expandedAh?: number,
): SegmentCapacity => ({
  segment: { index, kind, purpose: 'program', cycle, end_reason: 'cutoff', ...over },
  capacityAh,
  ...(expandedAh !== undefined ? { expandedAh } : {}),
});

describe('capacity per cycle and its trend', () => {
  it('2.50, 2.48, 2.46 Ah over three cycles fall 0.02 Ah (0.8 %) a cycle (hand-worked)', () => {
    const t = capacityTrend([
      seg(0, 'charge', 1, 2.6, { end_reason: 'termination_current' }),
      seg(1, 'discharge', 1, 2.5),
      seg(2, 'charge', 2, 2.6, { end_reason: 'termination_current' }),
      seg(3, 'discharge', 2, 2.48),
      seg(4, 'discharge', 3, 2.46),
      seg(5, 'discharge', null, 1.2, { purpose: 'storage', end_reason: 'storage_voltage' }),
    ]);
    expect(t.points.map((p) => [p.cycle, p.capacityAh])).toEqual([
      [1, 2.5],
      [2, 2.48],
      [3, 2.46],
    ]);
    expect(t.slopeAhPerCycle).toBeCloseTo(-0.02, 12);
    expect(t.slopeShare).toBeCloseTo(-0.008, 12);
    expect(t.changeAh).toBeCloseTo(-0.04, 12);
    expect(t.points[2]!.ofFirst).toBeCloseTo(0.984, 12);
  });

  it('the slope agrees with simple-statistics linearRegression on scattered cycles (reference library)', () => {
    const caps = [2.51, 2.47, 2.49, 2.44, 2.45, 2.41];
    const t = capacityTrend(caps.map((c, i) => seg(i, 'discharge', i + 1, c)));
    const ref = linearRegression(caps.map((c, i) => [i + 1, c]));
    expect(t.slopeAhPerCycle).toBeCloseTo(ref.m, 12);
    expect(t.slopeShare).toBeCloseTo(ref.m / (ref.m * 1 + ref.b), 12);
  });

  it('a discharge stopped short of its cutoff is no capacity, and one cycle has no trend', () => {
    const t = capacityTrend([
      seg(0, 'discharge', 1, 2.5),
      seg(1, 'discharge', 2, 0.7, { end_reason: 'over_temperature' }),
    ]);
    expect(t.points).toHaveLength(1);
    expect(t.slopeAhPerCycle).toBeNull();
  });

  it('a change within the combined expanded uncertainties is said to be so (GUM, quadrature)', () => {
    // U = √(0.02² + 0.02²) = 0.0283 Ah: a 0.02 Ah change is inside, 0.04 Ah beyond.
    const within = capacityTrend([
      seg(0, 'discharge', 1, 2.5, {}, 0.02),
      seg(1, 'discharge', 2, 2.48, {}, 0.02),
    ]);
    expect(within.changeBeyondUncertainty).toBe(false);
    const beyond = capacityTrend([
      seg(0, 'discharge', 1, 2.5, {}, 0.02),
      seg(1, 'discharge', 2, 2.46, {}, 0.02),
    ]);
    expect(beyond.changeBeyondUncertainty).toBe(true);
  });
});
