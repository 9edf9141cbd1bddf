/**
 * What the `cells` and `pack` commands ask of the registry: a cell's history and grade, the
 * graded list, the exports, and the cells eligible for a pack. Opens the database, calls the
 * pure parts, closes it.
 */
import { stringify } from 'csv-stringify/sync';
import { ErrorCodes, makeError } from '../core/errors.js';
import { planPack, type PackCell, type PackPlan } from '../pack/pack-plan.js';
import {
  gradeCell,
  gradeFromSummary,
  gradeLabel,
  type CellGrade,
  type GradeRules,
} from './grading.js';
import { cellHistory, type CellHistory } from './history.js';
import { Registry, type CellFilter, type CellListRow, type CellSortKey } from './registry-db.js';

function withRegistry<T>(path: string, fn: (r: Registry) => T): T {
  const registry = Registry.open(path);
  try {
    return fn(registry);
  } finally {
    registry.close();
  }
}

export interface CellView {
  history: CellHistory;
  grade: CellGrade | null;
}

export function showCell(registryPath: string, id: string, rules: GradeRules): CellView {
  return withRegistry(registryPath, (r) => {
    const cell = r.cell(id);
    const runs = r.runsOf(id);
    if (cell === null && runs.length === 0)
      throw makeError(
        ErrorCodes.REGISTRY_UNKNOWN_CELL,
        `no cell ${id} is registered and no run carries that id`,
        registryPath,
        '`cellvigil cells list` shows the registered cells; `cellvigil cells add` registers one.',
      );
    return {
      history: cellHistory(id, cell, runs, rules.trust),
      grade: cell === null ? null : gradeCell(cell, runs, rules),
    };
  });
}

export interface GradedRow extends CellListRow {
  grade: CellGrade;
}

export interface ListRequest {
  filter: CellFilter;
  sort?: CellSortKey;
  descending?: boolean;
  limit?: number;
  /** Keep only cells whose grade label (A, B, …, recycle, ungraded) is listed. */
  grades?: readonly string[];
}

/** The registered cells matching the request, each with its grade. */
export function listGraded(registryPath: string, q: ListRequest, rules: GradeRules): GradedRow[] {
  return withRegistry(registryPath, (r) => {
    const rows = r.listCells(
      q.filter,
      q.sort ?? 'id',
      q.descending ?? false,
      q.grades === undefined ? (q.limit ?? -1) : -1,
    );
    const sums = r.trustSummaries(
      rows.map((c) => c.cell_id),
      rules.trust,
    );
    const graded = rows.map((c) => ({
      ...c,
      grade: gradeFromSummary(
        c,
        sums.get(c.cell_id) ?? { runs: 0, trusted: 0, latest: null, doubts: [] },
        rules,
      ),
    }));
    const kept =
      q.grades === undefined
        ? graded
        : graded.filter((c) => q.grades!.includes(gradeLabel(c.grade)));
    return q.limit !== undefined && q.limit >= 0 ? kept.slice(0, q.limit) : kept;
  });
}

export function cellsCsv(rows: readonly GradedRow[]): string {
  return stringify(
    rows.map((c) => [
      c.cell_id,
      c.chemistry,
      c.rated_Ah,
      c.source,
      c.notes,
      c.runs,
      c.last_tested_ms === null ? '' : new Date(c.last_tested_ms).toISOString(),
      c.capacity_Ah ?? '',
      c.capacity_u_Ah ?? '',
      c.soh === null ? '' : Number(c.soh.toFixed(5)),
      c.dc_resistance_ohm ?? '',
      gradeLabel(c.grade),
      c.grade.status === 'ungraded'
        ? c.grade.reason
        : c.grade.status === 'recycle'
          ? c.grade.why
          : '',
    ]),
    {
      header: true,
      columns: [
        'cell_id',
        'chemistry',
        'rated_Ah',
        'source',
        'notes',
        'runs',
        'last_tested',
        'capacity_Ah',
        'capacity_u_Ah',
        'state_of_health',
        'dc_resistance_ohm',
        'grade',
        'grade_note',
      ],
    },
  );
}

/** Every run in the registry as CSV (standard uncertainties, k = 1). */
export function runsCsv(registryPath: string): string {
  return withRegistry(registryPath, (r) => {
    const rows: unknown[][] = [];
    let header: string[] | null = null;
    for (const run of r.allRuns()) {
      header ??= Object.keys(run);
      rows.push(Object.values(run).map((v) => v ?? ''));
    }
    return stringify(rows, { header: true, columns: header ?? ['run_key'] });
  });
}

export interface PackRequest extends ListRequest {
  series: number;
  parallel: number;
}

/** The eligible cells (registered, matching the filter, graded) and the plan built from them. */
export function buildPack(registryPath: string, q: PackRequest, rules: GradeRules): PackPlan {
  const rows = listGraded(registryPath, { ...q, limit: -1 }, rules);
  const eligible: PackCell[] = [];
  for (const c of rows) {
    if (c.grade.status !== 'graded') continue;
    eligible.push({
      cell_id: c.cell_id,
      capacity_Ah: c.grade.run.capacity_Ah,
      resistance_ohm: c.grade.run.dc_resistance_ohm,
    });
  }
  const chemistries = [...new Set(rows.map((c) => c.chemistry))];
  if (chemistries.length > 1)
    throw makeError(
      ErrorCodes.USAGE,
      `the eligible cells are of ${chemistries.length} chemistries (${chemistries.join(', ')}); a pack takes one`,
      '--chemistry',
      'Name the chemistry of the pack with --chemistry.',
    );
  const plan = planPack(eligible, q.series, q.parallel);
  if ('missing' in plan)
    throw makeError(
      ErrorCodes.PACK_TOO_FEW_CELLS,
      `${q.series}S${q.parallel}P needs ${q.series * q.parallel} graded cells; ${eligible.length} match (${plan.missing} missing)`,
      registryPath,
      'Widen the filter (another grade or chemistry), test more cells, or plan fewer in parallel.',
    );
  return plan;
}
