/**
 * Grading: which runs of a cell can be trusted, and which grade the latest trustworthy run puts
 * the cell in under its chemistry's rules. Pure: rules and runs in, a decision out.
 */
import type { RunRecord } from './run-record.js';

export interface GradeRule {
  grade: string;
  min_capacity_share: number;
  max_resistance_ohm?: number;
}

export interface TrustRules {
  min_runs: number;
  /** Expanded (k = 2) capacity uncertainty over capacity. */
  max_relative_uncertainty: number;
  require_calibration: boolean;
}

export interface GradeRules {
  trust: TrustRules;
  chemistries: Record<string, { grades: GradeRule[] }>;
}

/** Why a run does not count. */
export type RunDoubt = 'interrupted' | 'uncalibrated' | 'uncertain';

/** Coverage factor of the expanded uncertainty the rules speak of. */
const K = 2;

type TrustFields = Pick<
  RunRecord,
  'end_reason' | 'calibration_id' | 'capacity_Ah' | 'capacity_u_Ah'
>;

/** What grading reads of a run (lists fetch only these columns). */
export type GradeRun = TrustFields &
  Pick<RunRecord, 'cell_id' | 'started_ms' | 'dc_resistance_ohm'>;

/** The reasons a run cannot be trusted for grading and fade; empty when it can. */
export function runDoubts(run: TrustFields, trust: TrustRules): RunDoubt[] {
  const doubts: RunDoubt[] = [];
  // Only a discharge that reached the end-of-discharge voltage measured the capacity.
  if (run.end_reason !== 'cutoff') doubts.push('interrupted');
  if (trust.require_calibration && run.calibration_id === 'none') doubts.push('uncalibrated');
  const u = run.capacity_u_Ah;
  if (
    u === null ||
    !(run.capacity_Ah > 0) ||
    (K * u) / run.capacity_Ah > trust.max_relative_uncertainty
  )
    doubts.push('uncertain');
  return doubts;
}

export type CellGrade<R extends GradeRun = GradeRun> =
  | { status: 'graded'; grade: string; share: number; run: R }
  | { status: 'recycle'; share: number; run: R; why: string }
  | { status: 'ungraded'; reason: string };

export interface GradedCellInput {
  chemistry: string;
  rated_Ah: number;
}

function meets(rule: GradeRule, share: number, resistance: number | null): string | null {
  if (share < rule.min_capacity_share)
    return `capacity ${(share * 100).toFixed(1)} % of rated is below ${(rule.min_capacity_share * 100).toFixed(0)} %`;
  if (rule.max_resistance_ohm !== undefined) {
    if (resistance === null) return 'no DC resistance figure';
    if (resistance > rule.max_resistance_ohm)
      return `DC resistance ${(resistance * 1000).toFixed(1)} mΩ is above ${(rule.max_resistance_ohm * 1000).toFixed(1)} mΩ`;
  }
  return null;
}

/** Grades a cell from its runs (any order). */
export function gradeCell<R extends GradeRun>(
  cell: GradedCellInput,
  runs: readonly R[],
  rules: GradeRules,
): CellGrade<R> {
  const ruleSet = rules.chemistries[cell.chemistry];
  if (ruleSet === undefined)
    return { status: 'ungraded', reason: `no grade rules for chemistry ${cell.chemistry}` };
  if (runs.length === 0) return { status: 'ungraded', reason: 'no runs' };
  const trusted = runs.filter((r) => runDoubts(r, rules.trust).length === 0);
  if (trusted.length < rules.trust.min_runs) {
    const doubts = new Set(runs.flatMap((r) => runDoubts(r, rules.trust)));
    return {
      status: 'ungraded',
      reason: `${trusted.length} trustworthy run(s) of ${rules.trust.min_runs} needed (${[...doubts].join(', ')})`,
    };
  }
  const latest = trusted.reduce((a, b) => (b.started_ms > a.started_ms ? b : a));
  const share = latest.capacity_Ah / cell.rated_Ah;
  let why = 'no grade';
  for (const rule of ruleSet.grades) {
    const miss = meets(rule, share, latest.dc_resistance_ohm);
    if (miss === null) return { status: 'graded', grade: rule.grade, share, run: latest };
    why = miss;
  }
  return { status: 'recycle', share, run: latest, why };
}

/** A short word for lists: the grade, "recycle", or "ungraded". */
export function gradeLabel(g: CellGrade): string {
  return g.status === 'graded' ? g.grade : g.status;
}
