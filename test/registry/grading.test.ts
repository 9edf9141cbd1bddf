import { describe, expect, it } from 'vitest';
import { loadGradeRules, parseGradeRules } from '../../src/registry/grade-rules.js';
import { gradeCell, type GradeRules } from '../../src/registry/grading.js';
import { recordFromResult, type RunRecord } from '../../src/registry/run-record.js';
import { fixtureResult, type FixtureRun } from './run-fixtures.js';

function run(r: Partial<FixtureRun>): RunRecord {
  const rec = recordFromResult(
    fixtureResult({
      cell_id: 'G',
      started: '2026-01-01T00:00:00Z',
      capacity_Ah: 2.4,
      ...r,
    }) as never,
    'f',
    null,
  );
  if (typeof rec === 'string') throw new Error(rec);
  return rec;
}

const cell = { chemistry: 'li-ion', rated_Ah: 2.5 };

describe('grading by the shipped rules', () => {
  it('puts a cell in the first grade whose limits it meets, else recycling', async () => {
    const rules = await loadGradeRules();
    expect(
      gradeCell(cell, [run({ capacity_Ah: 2.3, dc_resistance_ohm: 0.05 })], rules),
    ).toMatchObject({ status: 'graded', grade: 'A' });
    expect(
      gradeCell(cell, [run({ capacity_Ah: 2.3, dc_resistance_ohm: 0.08 })], rules),
    ).toMatchObject({ status: 'graded', grade: 'B' });
    // 80 % of rated (common practice for the end of service life) is the floor of grade B.
    expect(
      gradeCell(cell, [run({ capacity_Ah: 2.0, dc_resistance_ohm: 0.05 })], rules),
    ).toMatchObject({ grade: 'B' });
    expect(
      gradeCell(cell, [run({ capacity_Ah: 1.99, dc_resistance_ohm: 0.05 })], rules),
    ).toMatchObject({ grade: 'C' });
    const worn = gradeCell(cell, [run({ capacity_Ah: 1.5 })], rules);
    expect(worn).toMatchObject({ status: 'recycle' });
    expect(worn.status === 'recycle' && worn.why).toMatch(/below 70 %/);
  });

  it('grades on the latest trustworthy run and marks cells without one as ungraded', async () => {
    const rules = await loadGradeRules();
    const latest = gradeCell(
      cell,
      [
        run({ started: '2025-01-01T00:00:00Z', capacity_Ah: 2.4 }),
        run({ started: '2026-01-01T00:00:00Z', capacity_Ah: 1.9 }),
        run({ started: '2026-06-01T00:00:00Z', capacity_Ah: 2.4, end_reason: 'stopped' }),
      ],
      rules,
    );
    expect(latest).toMatchObject({ status: 'graded', grade: 'C' });
    expect(gradeCell(cell, [], rules)).toEqual({ status: 'ungraded', reason: 'no runs' });
    const doubtful = gradeCell(
      cell,
      [run({ calibration_id: 'none' }), run({ end_reason: 'link_lost' }), run({ u_Ah: 0.2 })],
      rules,
    );
    expect(doubtful).toEqual({
      status: 'ungraded',
      reason: '0 trustworthy run(s) of 1 needed (interrupted, uncalibrated, uncertain)',
    });
    expect(gradeCell({ chemistry: 'alkaline', rated_Ah: 2.5 }, [run({})], rules)).toMatchObject({
      status: 'ungraded',
      reason: 'no grade rules for chemistry alkaline',
    });
  });

  it('refuses rules that are malformed or out of order, naming the key', () => {
    expect(() => parseGradeRules('trust: {min_runs: 0}\nchemistries: {}\n', 'g.yaml')).toThrow(
      /CV_CONFIG_INVALID|trust/,
    );
    const out = `trust: {min_runs: 1, max_relative_uncertainty: 0.05, require_calibration: true}
chemistries:
  li-ion:
    grades:
      - { grade: B, min_capacity_share: 0.8 }
      - { grade: A, min_capacity_share: 0.9 }
`;
    expect(() => parseGradeRules(out, 'g.yaml')).toThrow(
      /best first.*g\.yaml: chemistries\.li-ion\.grades\[1\]/,
    );
    const rules: GradeRules = parseGradeRules(out.replace('0.9', '0.7'), 'g.yaml');
    expect(rules.chemistries['li-ion']!.grades).toHaveLength(2);
  });
});
