import { describe, expect, it } from 'vitest';
import type { RunManifest } from '../../src/record/manifest.js';
import type { RunResult, SegmentFigures } from '../../src/record/result.js';
import { checkedDischarge, programVerdict } from '../../src/report/program-verdict.js';
import type { SegmentConditions } from '../../src/report/recompute-program.js';

const figure = { standard: 0, expanded: 0, k: 2 as const, basis: 'test', terms: [] };

function segment(
  index: number,
  kind: SegmentFigures['kind'],
  over: Partial<SegmentFigures> = {},
): SegmentFigures {
  return {
    index,
    kind,
    purpose: 'program',
    step: `steps[0].repeat.steps[${index % 4}]`,
    cycle: 1 + Math.floor(index / 4),
    started_ms: index * 1000,
    ended_ms: index * 1000 + 1000,
    end_reason:
      kind === 'discharge' ? 'cutoff' : kind === 'rest' ? 'rest_time' : 'termination_current',
    setpoint: kind === 'charge' ? { method: 'cc-cv' } : { cutoff_V: 2.5 },
    duration_s: kind === 'rest' ? 3600 : 5.1 * 3600,
    charge_Ah: 2.55,
    energy_Wh: 9.2,
    mean_current_A: kind === 'discharge' ? 0.5 : kind === 'charge' ? 1.25 : null,
    end_voltage_V: 2.5,
    uncertainty: { charge_Ah: figure, energy_Wh: figure },
    ...over,
  };
}

/** Two cycles of charge, rest, discharge, rest of a 2.5 Ah Li-ion cell. */
function result(secondDischarge: Partial<SegmentFigures>): RunResult {
  const segments = [0, 1, 2, 3, 4, 5, 6, 7].map((i) =>
    segment(
      i,
      (['charge', 'rest', 'discharge', 'rest'] as const)[i % 4]!,
      i === 6 ? secondDischarge : {},
    ),
  );
  const cycles = segments
    .filter((s) => s.kind === 'discharge' && s.end_reason === 'cutoff')
    .map((s, n) => ({
      cycle: n + 1,
      segment: s.index,
      capacity_Ah: s.charge_Ah,
      energy_Wh: s.energy_Wh,
      mean_current_A: s.mean_current_A,
      uncertainty: { capacity_Ah: figure, energy_Wh: figure },
      of_first: 1,
    }));
  return { cutoff_V: 2.5, segments, cycles } as unknown as RunResult;
}

const manifest = { chemistry: { id: 'li-ion' }, cells: 1 } as unknown as RunManifest;
const steady = (): SegmentConditions => ({ minA: 0.499, maxA: 0.501, startC: 21 });

// IEC 61960-3 rated capacity (from memory): discharge at 0.2 It within ±1 % to the end voltage
// at 20 ± 5 °C; the rating is met when the discharge lasts at least 5 h. 0.2 It of 2.5 Ah is 0.5 A.
describe("a program run's rated-capacity check", () => {
  it('is taken on the latest full cycle, names its clause and the charge before it', () => {
    const r = result({ duration_s: 5.2 * 3600 });
    expect(checkedDischarge(r)!.index).toBe(6);
    const v = programVerdict({ manifest, result: r, conditions: steady, ratedAh: 2.5 })!;
    expect(v.outcome).toBe('meets');
    expect(v.clause).toMatch(/IEC 61960-3 rated capacity/);
    expect(v.hours).toBeCloseTo(5.2, 6);
    expect(v.cautions[0]).toMatch(
      /charged it in segment 4 \(cc-cv, ended termination_current\) and rested it 60 min before the discharge checked \(segment 6\)/,
    );
  });

  it('does not meet the rating when the cycle lasted under 5 h at 0.2 It', () => {
    const r = result({ duration_s: 4.8 * 3600 });
    const v = programVerdict({ manifest, result: r, conditions: steady, ratedAh: 2.5 })!;
    expect(v.outcome).toBe('does_not_meet');
  });

  it('gives no verdict when the cycle was not at 0.2 It within 1 %', () => {
    const r = result({ mean_current_A: 1.0 });
    const wide = (): SegmentConditions => ({ minA: 0.99, maxA: 1.01, startC: 21 });
    const v = programVerdict({ manifest, result: r, conditions: wide, ratedAh: 2.5 })!;
    expect(v.outcome).toBe('method_not_followed');
  });

  it('falls back to the last discharge when none reached its cutoff', () => {
    const r = result({ end_reason: 'setpoint_not_held' });
    r.cycles = [];
    r.segments = r.segments!.map((s) => (s.index === 2 ? { ...s, end_reason: 'stopped' } : s));
    expect(checkedDischarge(r)!.index).toBe(6);
  });
});
