import { describe, expect, it } from 'vitest';
import { ratedCapacityVerdict, type VerdictInput } from '../../src/report/verdicts.js';

// IEC 61951-2 rated capacity (NiMH) (clause wording from memory): at
// 20 ± 5 °C, discharge at 0.2 It to 1.0 V; the rating is met when it lasts at least 5 h.
// A 2.0 Ah cell: It = 2.0 A, so 0.2 It = 0.4 A. The standards hold a controlled current within
// ±1 % of its value (general test conditions, from memory): 0.396 to 0.404 A.
const nimh = (over: Partial<VerdictInput> = {}): VerdictInput => ({
  chemistryId: 'nimh',
  cells: 1,
  cutoffPerCellV: 1.0,
  ratedAh: 2.0,
  averageCurrentA: 0.4,
  minCurrentA: 0.398,
  maxCurrentA: 0.402,
  durationS: 5 * 3600,
  endReason: 'cutoff',
  startTemperatureC: 21,
  loadSwitchOns: 1,
  ...over,
});

describe('rated-capacity check in the manner of IEC 61951-2', () => {
  it('5.00 h at 0.2 It to 1.0 V meets the rating (IEC 61951-2 boundary)', () => {
    const v = ratedCapacityVerdict(nimh({ durationS: 5.0 * 3600 }))!;
    expect(v.outcome).toBe('meets');
    expect(v.standard).toBe('IEC 61951-2');
  });

  it('4.99 h does not (IEC 61951-2 boundary)', () => {
    const v = ratedCapacityVerdict(nimh({ durationS: 4.99 * 3600 }))!;
    expect(v.outcome).toBe('does_not_meet');
    expect(v.summary).toContain('4.99 h');
  });

  it('is labelled a check against the method, not a certification', () => {
    expect(ratedCapacityVerdict(nimh())!.label).toBe(
      'a check against the method of IEC 61951-2, not a certification',
    );
    expect(ratedCapacityVerdict(nimh({ chemistryId: 'nicd' }))!.label).toBe(
      'a check against the method of IEC 61951-1, not a certification',
    );
    expect(ratedCapacityVerdict(nimh({ chemistryId: 'li-ion', cutoffPerCellV: 2.75 }))!.label).toBe(
      'a check against the method of IEC 61960-3, not a certification',
    );
  });

  it('says the method was not followed instead of a verdict: wrong rate, temperature, no rating, end voltage, pulses', () => {
    const cases: Array<[Partial<VerdictInput>, string]> = [
      [{ averageCurrentA: 0.5 }, 'from 0.2 It'],
      [{ averageCurrentA: 1.2 }, '3.00 times 0.2 It'],
      [{ startTemperatureC: 27 }, 'outside 20 ± 5 °C'],
      [{ startTemperatureC: 14.9 }, 'outside 20 ± 5 °C'],
      [{ startTemperatureC: null }, 'temperature is unknown'],
      [{ ratedAh: null }, 'no rated capacity'],
      [{ cutoffPerCellV: 0.9 }, 'the method ends at 1.0 V per cell'],
      [{ loadSwitchOns: 12 }, 'one continuous discharge'],
    ];
    for (const [over, why] of cases) {
      const v = ratedCapacityVerdict(nimh(over))!;
      expect(v.outcome).toBe('method_not_followed');
      expect(v.summary).toContain('No verdict');
      expect(v.reasons.join(' ')).toContain(why);
    }
  });

  it('within ±1 % of 0.2 It and the 15–25 °C band the check applies (IEC 61951-2, from memory)', () => {
    const at = (lo: number, hi: number, t: number) =>
      ratedCapacityVerdict(
        nimh({
          averageCurrentA: (lo + hi) / 2,
          minCurrentA: lo,
          maxCurrentA: hi,
          startTemperatureC: t,
        }),
      )!.outcome;
    expect(at(0.3961, 0.4039, 25)).toBe('meets');
    expect(at(0.3961, 0.4039, 15)).toBe('meets');
    expect(at(0.3959, 0.4, 20)).toBe('method_not_followed');
    expect(at(0.4, 0.4041, 20)).toBe('method_not_followed');
  });

  it('names the clauses it follows: the method and the tolerance on current', () => {
    const v = ratedCapacityVerdict(nimh())!;
    expect(v.clause).toContain('IEC 61951-2 rated capacity: discharge at 0.2 It to 1.0 V per cell');
    expect(v.clause).toContain('a controlled current within ±1 % (from memory)');
    expect(v.reasons[0]).toContain('current held at 0.2 It = 0.400 A within ±1 %');
  });

  it('a constant-current discharge gives a verdict where a resistor load gives none', () => {
    // 0.2 It held by a constant-current load: 0.4 A ± 0.5 mA; 5.1 h to 1.0 V.
    const cc = ratedCapacityVerdict(
      nimh({ minCurrentA: 0.3995, maxCurrentA: 0.4005, durationS: 5.1 * 3600 }),
    )!;
    expect(cc.outcome).toBe('meets');
    // The same mean through a resistor: 0.45 A at the start falling to 0.36 A at 1.0 V.
    const r = ratedCapacityVerdict(
      nimh({ minCurrentA: 0.36, maxCurrentA: 0.45, durationS: 5.1 * 3600 }),
    )!;
    expect(r.outcome).toBe('method_not_followed');
    expect(r.reasons.join(' ')).toContain('the current was not constant');
    expect(r.reasons.join(' ')).toContain('IEC 61951-2 general test conditions');
  });

  it('a tolerance widened beyond the standard is said so', () => {
    const v = ratedCapacityVerdict(
      nimh({
        averageCurrentA: 0.4 * 1.049,
        minCurrentA: 0.41,
        maxCurrentA: 0.42,
        rateTolerance: 0.05,
      }),
    )!;
    expect(v.outcome).toBe('meets');
    expect(v.cautions.join(' ')).toContain("widened to ±5 %; the standard's is ±1 %");
  });

  it('a run stopped early: 5 h already shown is enough, less is incomplete', () => {
    expect(
      ratedCapacityVerdict(nimh({ endReason: 'stopped', durationS: 5.2 * 3600 }))!.outcome,
    ).toBe('meets');
    expect(ratedCapacityVerdict(nimh({ endReason: 'stopped', durationS: 3 * 3600 }))!.outcome).toBe(
      'incomplete',
    );
  });

  it('no check for a chemistry without a rated-capacity method here', () => {
    expect(ratedCapacityVerdict(nimh({ chemistryId: 'alkaline' }))).toBeNull();
  });

  it('a resistor load whose current falls with the voltage is named as the reason', () => {
    const v = ratedCapacityVerdict(nimh({ minCurrentA: 0.34, maxCurrentA: 0.45 }))!;
    expect(v.reasons.join(' ')).toContain('ranged from 0.340 A to 0.450 A');
  });
});
