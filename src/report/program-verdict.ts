/**
 * The rated-capacity check of a program run: the same check as for a discharge run, taken on the
 * program's latest full cycle (the discharge its top-level figures come from), or on its last
 * discharge when none reached the cutoff. The charge and rest before that discharge are in the
 * run, so the check says what they were instead of "the run folder cannot show that".
 */
import type { RunManifest } from '../record/manifest.js';
import type { RunResult, SegmentFigures } from '../record/result.js';
import type { SegmentConditions } from './recompute-program.js';
import { METHODS } from './verdict-methods.js';
import { ratedCapacityVerdict, type Verdict } from './verdicts.js';

export interface ProgramVerdictInput {
  manifest: RunManifest;
  result: RunResult;
  conditions: (segmentIndex: number) => SegmentConditions;
  ratedAh: number | null;
  rateTolerance?: number;
}

/** The discharge the check is taken on: the latest full cycle's, else the last program discharge. */
export function checkedDischarge(result: RunResult): SegmentFigures | null {
  const segments = result.segments ?? [];
  const cycle = result.cycles?.at(-1);
  if (cycle) return segments.find((s) => s.index === cycle.segment) ?? null;
  return segments.findLast((s) => s.kind === 'discharge' && s.purpose === 'program') ?? null;
}

/** What charged the cell before `seg`, and how long it rested, in words; null when nothing did. */
function chargeBefore(segments: readonly SegmentFigures[], seg: SegmentFigures): string | null {
  const before = segments.filter((s) => s.index < seg.index);
  const charge = before.findLast((s) => s.kind === 'charge');
  if (!charge) return null;
  const restS = before
    .filter((s) => s.index > charge.index && s.kind === 'rest')
    .reduce((t, s) => t + s.duration_s, 0);
  const method =
    typeof charge.setpoint['method'] === 'string' ? charge.setpoint['method'] : 'charge';
  return `this run charged it in segment ${charge.index} (${method}, ended ${charge.end_reason}) and rested it ${(restS / 60).toFixed(0)} min before the discharge checked (segment ${seg.index})`;
}

export function programVerdict(x: ProgramVerdictInput): Verdict | null {
  const seg = checkedDischarge(x.result);
  if (seg === null) return null;
  const m = x.manifest;
  const c = x.conditions(seg.index);
  const mean = seg.mean_current_A ?? 0;
  const cutoffV = Number(seg.setpoint['cutoff_V'] ?? x.result.cutoff_V);
  const verdict = ratedCapacityVerdict({
    chemistryId: m.chemistry.id,
    cells: m.cells,
    cutoffPerCellV: cutoffV / m.cells,
    ratedAh: x.ratedAh,
    averageCurrentA: mean,
    minCurrentA: c.minA ?? mean,
    maxCurrentA: c.maxA ?? mean,
    durationS: seg.duration_s,
    endReason: seg.end_reason,
    startTemperatureC: c.startC,
    loadSwitchOns: 1,
    ...(x.rateTolerance !== undefined ? { rateTolerance: x.rateTolerance } : {}),
  });
  const method = METHODS[m.chemistry.id];
  const charged = chargeBefore(x.result.segments ?? [], seg);
  if (verdict === null || method === undefined) return verdict;
  const chargeNote = charged
    ? `The method asks for the cell to have been ${method.charge}; ${charged}.`
    : `The method asks for the cell to have been ${method.charge}; this program did not charge it before the discharge checked.`;
  return { ...verdict, cautions: [chargeNote, ...verdict.cautions.slice(1)] };
}
