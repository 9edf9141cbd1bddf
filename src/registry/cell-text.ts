/** Terminal text for the `cells` and `pack` commands: aligned tables and short summaries. */
import type { PackPlan } from '../pack/pack-plan.js';
import { gradeLabel } from './grading.js';
import type { CellView, GradedRow } from './cell-queries.js';
import { isoDate } from './history-page.js';
import type { RunRecord } from './run-record.js';

const dash = (x: number | null | undefined, f: (x: number) => string): string =>
  x === null || x === undefined || !Number.isFinite(x) ? '—' : f(x);

export function table(rows: string[][]): string {
  const widths = rows[0]!.map((_, c) => Math.max(...rows.map((r) => r[c]!.length)));
  return rows
    .map((r) =>
      r
        .map((cell, c) => cell.padEnd(widths[c]!))
        .join('  ')
        .trimEnd(),
    )
    .join('\n');
}

export function listText(rows: readonly GradedRow[]): string {
  const head = [
    'cell',
    'chemistry',
    'rated Ah',
    'runs',
    'last tested',
    'capacity Ah (±, k=2)',
    'health',
    'DC mΩ',
    'grade',
  ];
  return table([
    head,
    ...rows.map((c) => [
      c.cell_id,
      c.chemistry,
      c.rated_Ah.toFixed(3),
      String(c.runs),
      dash(c.last_tested_ms, isoDate),
      c.capacity_Ah === null
        ? '—'
        : `${c.capacity_Ah.toFixed(4)} ± ${dash(c.capacity_u_Ah, (u) => (2 * u).toFixed(4))}`,
      dash(c.soh, (s) => `${(s * 100).toFixed(1)} %`),
      dash(c.dc_resistance_ohm, (r) => (r * 1000).toFixed(1)),
      gradeLabel(c.grade),
    ]),
  ]);
}

export function historyText(v: CellView): string {
  const h = v.history;
  const lines: string[] = [];
  const c = h.cell;
  lines.push(
    c === null
      ? `cell ${h.cell_id} (not registered: no rated capacity)`
      : `cell ${h.cell_id}: ${c.chemistry}, rated ${c.rated_Ah} Ah${c.source ? `, from ${c.source}` : ''}${c.notes ? ` (${c.notes})` : ''}`,
  );
  lines.push(
    table([
      [
        'started',
        'end',
        'capacity Ah (±, k=2)',
        'health',
        'DC mΩ',
        'C-rate',
        'calibration',
        'left out because',
      ],
      ...h.rows.map((r) => [
        r.run.started_wall.slice(0, 16).replace('T', ' '),
        r.run.end_reason,
        `${r.run.capacity_Ah.toFixed(4)} ± ${dash(r.run.capacity_u_Ah, (u) => (2 * u).toFixed(4))}`,
        dash(r.soh, (s) => `${(s * 100).toFixed(1)} %`),
        dash(r.run.dc_resistance_ohm, (x) => (x * 1000).toFixed(1)),
        dash(r.c_rate, (x) => x.toFixed(2)),
        r.run.calibration_id,
        r.doubts.join(', '),
      ]),
    ]),
  );
  for (const r of h.rows) if (r.run.cycles?.length) lines.push(cyclesText(r.run));
  const f = h.fade;
  lines.push(
    f === null
      ? `fade: none fitted (${h.fadeNote ?? ''})`
      : `fade: ${(f.per_year_Ah * 1000).toFixed(1)} ± ${(2 * f.u_per_year_Ah * 1000).toFixed(1)} mAh per year (k = 2)${f.per_year_share === null ? '' : `, ${(f.per_year_share * 100).toFixed(2)} % of rated per year`}, ${f.runs} runs over ${f.span_years.toFixed(2)} years`,
  );
  const e = h.endOfLife;
  lines.push(
    e.kind === 'projected'
      ? `80 % of rated: ${e.reached ? 'reached (fitted line) on' : 'projected for'} ${isoDate(e.date_ms)} ± ${(2 * e.u_days).toFixed(0)} days (k = 2)`
      : `80 % of rated: no projection (${e.why})`,
  );
  const g = v.grade;
  if (g !== null)
    lines.push(
      `grade: ${gradeLabel(g)}${g.status === 'ungraded' ? ` (${g.reason})` : g.status === 'recycle' ? ` (${g.why})` : ''}`,
    );
  return `${lines.join('\n')}\n`;
}

/** A program run's cycles: each full discharge's capacity with its expanded uncertainty. */
function cyclesText(run: RunRecord): string {
  const started = run.started_wall.slice(0, 16).replace('T', ' ');
  return `cycles of the run started ${started} (its figure above is the last one's):\n${table([
    ['cycle', 'capacity Ah (±, k=2)', 'of first', 'energy Wh', 'mean A'],
    ...(run.cycles ?? []).map((c) => [
      String(c.cycle),
      `${c.capacity_Ah.toFixed(4)} ± ${dash(c.capacity_u_Ah, (u) => (2 * u).toFixed(4))}`,
      dash(c.of_first, (x) => `${(x * 100).toFixed(1)} %`),
      dash(c.energy_Wh, (x) => x.toFixed(3)),
      dash(c.mean_current_A, (x) => x.toFixed(3)),
    ]),
  ])}`;
}

export function packText(plan: PackPlan): string {
  const pct = (x: number): string => `${((x / plan.mean_group_Ah) * 100).toFixed(3)} %`;
  return `${table([
    ['group', 'capacity Ah', 'resistance mΩ', 'cells'],
    ...plan.groups.map((g) => [
      String(g.index),
      g.capacity_Ah.toFixed(4),
      dash(g.resistance_ohm, (r) => (r * 1000).toFixed(3)),
      g.cells.length <= 6
        ? g.cells.map((c) => c.cell_id).join(' ')
        : `${g.cells
            .slice(0, 5)
            .map((c) => c.cell_id)
            .join(' ')} … (${g.cells.length})`,
    ]),
  ])}
pack ${plan.series}S${plan.parallel}P: expected capacity ${plan.pack_capacity_Ah.toFixed(3)} Ah (weakest group); mean group ${plan.mean_group_Ah.toFixed(3)} Ah
group spread ${(plan.spread_Ah * 1000).toFixed(1)} mAh (${pct(plan.spread_Ah)} of the mean); lower bound ${(plan.lower_bound_Ah * 1000).toFixed(1)} mAh (${pct(plan.lower_bound_Ah)})
${plan.series * plan.parallel} of ${plan.eligible} eligible cells used, ${plan.left_out.length} left out
`;
}
