import { linearRegression } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import type { TrustRules } from '../../src/registry/grading.js';
import { cellHistory, END_OF_LIFE_SHARE, projectEndOfLife } from '../../src/registry/history.js';
import { recordFromResult, type RunRecord } from '../../src/registry/run-record.js';
import { mulberry32 } from '../../src/sim/prng.js';
import { fixtureResult, type FixtureRun } from './run-fixtures.js';

const TRUST: TrustRules = {
  min_runs: 1,
  max_relative_uncertainty: 0.05,
  require_calibration: true,
};
const YEAR = 365.25 * 86_400_000;
const T0 = Date.parse('2024-01-01T00:00:00.000Z');

function run(r: FixtureRun): RunRecord {
  const rec = recordFromResult(fixtureResult(r) as never, 'f', null);
  if (typeof rec === 'string') throw new Error(rec);
  return rec;
}

const at = (years: number): string => new Date(T0 + years * YEAR).toISOString();
const cell = {
  cell_id: 'X',
  chemistry: 'li-ion',
  rated_Ah: 2.5,
  source: '',
  notes: '',
  registered_at: '',
};

describe('cell history', () => {
  it('orders runs by time, with state of health and C-rate against the rating', () => {
    const h = cellHistory(
      'X',
      cell,
      [
        run({ cell_id: 'X', started: at(1), capacity_Ah: 2.25, duration_s: 18_000 }),
        run({ cell_id: 'X', started: at(0), capacity_Ah: 2.5, duration_s: 18_000 }),
      ],
      TRUST,
    );
    expect(h.rows.map((r) => r.soh)).toEqual([1, 0.9]);
    // It = rated capacity / 1 h (IEC 61960-3): 2.5 Ah over 5 h is 0.5 A, 0.2 It.
    expect(h.rows[0]!.c_rate).toBeCloseTo(0.2, 12);
    expect(h.fade).toBeNull();
    expect(h.fadeNote).toMatch(/a fade needs 3/);
  });

  it('fits the fade with the textbook slope uncertainty u/√Σ(x−x̄)² for equal weights (Taylor, An Introduction to Error Analysis, ch. 8, from memory)', () => {
    const xs = [0, 0.5, 1, 1.5, 2];
    const u = 0.01;
    const h = cellHistory(
      'X',
      cell,
      xs.map((x) => run({ cell_id: 'X', started: at(x), capacity_Ah: 2.5 - 0.1 * x, u_Ah: u })),
      TRUST,
    );
    const mean = xs.reduce((s, x) => s + x, 0) / xs.length;
    const sxx = xs.reduce((s, x) => s + (x - mean) ** 2, 0);
    expect(h.fade!.per_year_Ah).toBeCloseTo(-0.1, 9);
    expect(h.fade!.u_per_year_Ah).toBeCloseTo(u / Math.sqrt(sxx), 9);
    expect(h.fade!.per_year_share).toBeCloseTo(-0.04, 9);
  });

  it('weights runs by their uncertainty: an equal-weight fit agrees with simple-statistics, a doubtful run barely moves the weighted one', () => {
    const rnd = mulberry32(3);
    const xs = [0, 0.3, 0.7, 1.1, 1.6, 2.2];
    const ys = xs.map((x) => 2.45 - 0.08 * x + 0.01 * (rnd() - 0.5));
    const equal = cellHistory(
      'X',
      cell,
      xs.map((x, i) => run({ cell_id: 'X', started: at(x), capacity_Ah: ys[i]!, u_Ah: 0.01 })),
      TRUST,
    );
    const ref = linearRegression(xs.map((x, i) => [x, ys[i]!]));
    expect(equal.fade!.per_year_Ah).toBeCloseTo(ref.m, 6);
    expect(equal.fade!.intercept_Ah).toBeCloseTo(ref.b, 6);
    // One run 0.3 Ah off but stated 50× less certain hardly changes the weighted slope.
    const off = xs.map((x, i) =>
      run({
        cell_id: 'X',
        started: at(x),
        capacity_Ah: ys[i]! + (i === 5 ? -0.04 : 0),
        u_Ah: i === 5 ? 0.05 : 0.001,
      }),
    );
    const weighted = cellHistory('X', cell, off, {
      ...TRUST,
      max_relative_uncertainty: 0.1,
    });
    expect(Math.abs(weighted.fade!.per_year_Ah - ref.m)).toBeLessThan(0.01);
  });

  it('leaves untrustworthy runs out of the fade: interrupted, uncalibrated, too uncertain', () => {
    const runs = [
      run({ cell_id: 'X', started: at(0), capacity_Ah: 2.5 }),
      run({ cell_id: 'X', started: at(0.5), capacity_Ah: 2.4 }),
      run({ cell_id: 'X', started: at(0.7), capacity_Ah: 1.0, end_reason: 'link_lost' }),
      run({ cell_id: 'X', started: at(0.8), capacity_Ah: 2.0, calibration_id: 'none' }),
      run({ cell_id: 'X', started: at(0.9), capacity_Ah: 2.0, u_Ah: 0.2 }),
    ];
    const h = cellHistory('X', cell, runs, TRUST);
    expect(h.rows.map((r) => r.doubts)).toEqual([
      [],
      [],
      ['interrupted'],
      ['uncalibrated'],
      ['uncertain'],
    ]);
    expect(h.fade).toBeNull();
  });

  it('projects the date of 80 % of rated (common practice) where the fitted line crosses it', () => {
    const runs = [0, 1, 2].map((x) =>
      run({ cell_id: 'X', started: at(x), capacity_Ah: 2.5 - 0.125 * x, u_Ah: 0.005 }),
    );
    const h = cellHistory('X', cell, runs, TRUST);
    // 2.5 − 0.125·t = 0.8 × 2.5 → t = 4 years.
    expect(END_OF_LIFE_SHARE).toBe(0.8);
    expect(h.endOfLife.kind).toBe('projected');
    if (h.endOfLife.kind === 'projected') {
      expect(h.endOfLife.date_ms).toBeCloseTo(T0 + 4 * YEAR, -4);
      expect(h.endOfLife.reached).toBe(false);
    }
  });

  it("the projected date's uncertainty matches a Monte Carlo of the same fit (GUM Supplement 1 method)", () => {
    const xs = [0, 0.5, 1, 1.5, 2, 2.5];
    const u = 0.01;
    const runs = xs.map((x) =>
      run({ cell_id: 'X', started: at(x), capacity_Ah: 2.5 - 0.1 * x, u_Ah: u }),
    );
    const h = cellHistory('X', cell, runs, TRUST);
    const eol = projectEndOfLife(h.fade!, 2.5, T0);
    if (eol.kind !== 'projected') throw new Error('no projection');
    const rnd = mulberry32(11);
    const gauss = (): number =>
      Math.sqrt(-2 * Math.log(Math.max(1e-12, rnd()))) * Math.cos(2 * Math.PI * rnd());
    const crossings: number[] = [];
    for (let t = 0; t < 4000; t++) {
      const fit = linearRegression(xs.map((x) => [x, 2.5 - 0.1 * x + u * gauss()]));
      crossings.push((2.0 - fit.b) / fit.m);
    }
    const mean = crossings.reduce((s, c) => s + c, 0) / crossings.length;
    const sd = Math.sqrt(
      crossings.reduce((s, c) => s + (c - mean) ** 2, 0) / (crossings.length - 1),
    );
    expect(eol.u_days / 365.25 / sd).toBeGreaterThan(0.9);
    expect(eol.u_days / 365.25 / sd).toBeLessThan(1.1);
  });

  it('projects nothing for a cell whose fade is within its noise', () => {
    const runs = [0, 1, 2].map((x, i) =>
      run({ cell_id: 'X', started: at(x), capacity_Ah: 2.5 + [0, -0.01, 0.005][i]!, u_Ah: 0.01 }),
    );
    expect(cellHistory('X', cell, runs, TRUST).endOfLife).toEqual({
      kind: 'none',
      why: 'no significant fade',
    });
  });
});
