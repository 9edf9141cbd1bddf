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
  'end_reason' | 'calibration_id' | 'capacity_Ah' | 'capacity_u_Ah' | 'full_cycles'
>;

/** What grading reads of a run (lists fetch only these columns). */
export type GradeRun = TrustFields &
  Pick<RunRecord, 'cell_id' | 'started_ms' | 'dc_resistance_ohm'>;

/** The reasons a run cannot be trusted for grading and fade; empty when it can. */
export function runDoubts(run: TrustFields, trust: TrustRules): RunDoubt[] {
  const doubts: RunDoubt[] = [];
  // Only a discharge that reached the end-of-discharge voltage measured the capacity: a run
  // that ended at its cutoff, or a program run with a full cycle (its figures are the latest
  // full cycle's, whatever ended the program later).
  if (run.end_reason !== 'cutoff' && !((run.full_cycles ?? 0) > 0)) doubts.push('interrupted');
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

/** What grading needs to know of a cell's runs; lists get it from the database in one row. */
export interface TrustSummary<R extends GradeRun = GradeRun> {
  runs: number;
  trusted: number;
  /** The latest run that counts, or null. */
  latest: R | null;
  /** Every doubt found among the runs, in the order of RUN_DOUBTS. */
  doubts: RunDoubt[];
}

export const RUN_DOUBTS: readonly RunDoubt[] = ['interrupted', 'uncalibrated', 'uncertain'];

/** The summary of a cell's runs (any order) under the trust rules. */
export function trustSummary<R extends GradeRun>(
  runs: readonly R[],
  trust: TrustRules,
): TrustSummary<R> {
  let trusted = 0;
  let latest: R | null = null;
  const found = new Set<RunDoubt>();
  for (const r of runs) {
    const d = runDoubts(r, trust);
    for (const x of d) found.add(x);
    if (d.length > 0) continue;
    trusted++;
    if (latest === null || r.started_ms > latest.started_ms) latest = r;
  }
  return { runs: runs.length, trusted, latest, doubts: RUN_DOUBTS.filter((d) => found.has(d)) };
}

/** Grades a cell from the summary of its runs. */
export function gradeFromSummary<R extends GradeRun>(
  cell: GradedCellInput,
  s: TrustSummary<R>,
  rules: GradeRules,
): CellGrade<R> {
  const ruleSet = rules.chemistries[cell.chemistry];
  if (ruleSet === undefined)
    return { status: 'ungraded', reason: `no grade rules for chemistry ${cell.chemistry}` };
  if (s.runs === 0) return { status: 'ungraded', reason: 'no runs' };
  if (s.trusted < rules.trust.min_runs || s.latest === null)
    return {
      status: 'ungraded',
      reason: `${s.trusted} trustworthy run(s) of ${rules.trust.min_runs} needed (${s.doubts.join(', ')})`,
    };
  const latest = s.latest;
  const share = latest.capacity_Ah / cell.rated_Ah;
  let why = 'no grade';
  for (const rule of ruleSet.grades) {
    const miss = meets(rule, share, latest.dc_resistance_ohm);
    if (miss === null) return { status: 'graded', grade: rule.grade, share, run: latest };
    why = miss;
  }
  return { status: 'recycle', share, run: latest, why };
}

/** Grades a cell from its runs (any order). */
export function gradeCell<R extends GradeRun>(
  cell: GradedCellInput,
  runs: readonly R[],
  rules: GradeRules,
): CellGrade<R> {
  return gradeFromSummary(cell, trustSummary(runs, rules.trust), rules);
}

/** A short word for lists: the grade, "recycle", or "ungraded". */
export function gradeLabel(g: CellGrade): string {
  return g.status === 'graded' ? g.grade : g.status;
}
