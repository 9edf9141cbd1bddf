/**
 * A program file checked against a chemistry, a cell count and a rated capacity, and turned into
 * a flat plan of absolute setpoints. Every charge passes resolveCharge and every cutoff
 * resolveCutoff, so no program reaches past the chemistry's ceilings and floors.
 */
import { resolveCharge, type ResolvedCharge } from '../chemistry/charge-limits.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { resolveCutoff, validateCells } from '../chemistry/limits.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import type {
  ChargePlan,
  ChargeStepSpec,
  DischargePlan,
  DischargeStepSpec,
  Plan,
  PlannedStep,
  ProgramFile,
  RestPlan,
  RestStepSpec,
  StepSpec,
  StoragePlan,
} from './program-types.js';

/**
 * Over the charge ceiling by more than this share, a charge is aborted: room for the reading's
 * noise and a charger's regulation (about 1 %, common practice), never a licence to charge higher.
 */
export const CEILING_SLACK = 0.01;

/** A charger that has ended draws at most a trickle, C/20 or less (common practice). */
export const CHARGER_ENDED_C = 0.05;

export interface PlanContext {
  profile: ChemistryProfile;
  cells: number;
  /** Rated capacity for C-rates; the file's rated_Ah when not given. */
  ratedAh?: number;
  /** The file, for messages. */
  where: string;
}

interface Ctx extends PlanContext {
  rated: number | null;
}

function needRated(c: Ctx, at: string): number {
  if (c.rated !== null) return c.rated;
  throw makeError(
    ErrorCodes.CONFIG_INVALID,
    'the program uses C-rates or charges, but no rated capacity is known',
    `${c.where}, key ${at}`,
    'Add rated_Ah (the capacity printed on the cell, in Ah) to the program, or give it with the run.',
  );
}

function chargeLimits(c: Ctx, r: ResolvedCharge, rated: number) {
  return {
    ceilingV: r.V_per_cell * c.cells * (1 + CEILING_SLACK),
    currentA: r.current_C * rated,
    timeoutS: r.timeout_h * 3600,
    minTemperatureC: r.minTemperatureC,
    maxTemperatureC: r.maxTemperatureC,
  };
}

function planCharge(c: Ctx, s: ChargeStepSpec, at: string): ChargePlan {
  const rated = needRated(c, at);
  const where = `${c.where}, ${at}`;
  const until = s.until ?? (c.profile.charge?.method === 'cc-cv' ? 'cc-cv' : 'charger');
  if ((until === 'time') !== (s.hours !== undefined))
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      until === 'time' ? 'a timed charge needs its hours' : 'hours applies to `until: time` only',
      `${where}, key hours`,
      'Give `until: time` together with `hours`, or neither.',
    );
  const r = resolveCharge(
    c.profile,
    {
      until: until === 'time' ? 'charger' : until,
      ...(s.V_per_cell !== undefined ? { V_per_cell: s.V_per_cell } : {}),
      ...(s.current_C !== undefined ? { current_C: s.current_C } : {}),
      ...(s.termination_C !== undefined ? { termination_C: s.termination_C } : {}),
      ...(s.timeout_h !== undefined ? { timeout_h: s.timeout_h } : {}),
    },
    where,
  );
  if (s.hours !== undefined && s.hours > r.timeout_h)
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      `a timed charge of ${s.hours} h is longer than the charge timeout of ${r.timeout_h} h`,
      `${where}, key hours`,
      `Charge for ${r.timeout_h} h or less.`,
    );
  const done = r.method === 'cc-cv' ? r.termination_C! : until === 'time' ? null : CHARGER_ENDED_C;
  return {
    kind: 'charge',
    method: until,
    targetV: r.V_per_cell * c.cells,
    ...chargeLimits(c, r, rated),
    doneBelowA: done === null ? null : done * rated,
    durationS: s.hours !== undefined ? s.hours * 3600 : null,
  };
}

function planRest(c: Ctx, s: RestStepSpec): RestPlan {
  const minutes = s.minutes ?? s.max_minutes!;
  const settle = s.settle_mV_per_min;
  return {
    kind: 'rest',
    durationS: minutes * 60,
    settleVPerS: settle === undefined ? null : (settle / 1000 / 60) * c.cells,
  };
}

function planDischarge(c: Ctx, s: DischargeStepSpec, at: string): DischargePlan {
  const cutoff = resolveCutoff(c.profile, c.cells, s.cutoff_V_per_cell, `${c.where}, key ${at}`);
  const load: DischargePlan['load'] =
    s.current_A !== undefined
      ? { type: 'constant_current', A: s.current_A }
      : s.current_C !== undefined
        ? { type: 'constant_current', A: s.current_C * needRated(c, `${at}.current_C`) }
        : s.power_W !== undefined
          ? { type: 'constant_power', W: s.power_W }
          : { type: 'resistor' };
  return {
    kind: 'discharge',
    load,
    cutoffV: cutoff.total,
    timeoutS: s.timeout_h !== undefined ? s.timeout_h * 3600 : null,
    maxTemperatureC: c.profile.max_temperature_C.value,
  };
}

function planStorage(c: Ctx, current: number | undefined, at: string): StoragePlan {
  const rated = needRated(c, at);
  const storageV =
    c.profile.charge?.method === 'cc-cv' ? c.profile.charge.storage_V_per_cell : undefined;
  if (storageV === undefined)
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      `the ${c.profile.id} profile names no storage voltage`,
      `${c.where}, key ${at}`,
      'Remove the storage step (nickel cells are stored at any charge), or end with a charge.',
    );
  const r = resolveCharge(
    c.profile,
    { V_per_cell: storageV.value, ...(current !== undefined ? { current_C: current } : {}) },
    `${c.where}, ${at}`,
  );
  return {
    kind: 'storage',
    targetV: storageV.value * c.cells,
    currentA: r.current_C * rated,
    charge: { ...chargeLimits(c, r, rated), doneBelowA: r.termination_C! * rated },
    maxTemperatureC: c.profile.max_temperature_C.value,
  };
}

function planStep(
  c: Ctx,
  s: StepSpec,
  at: string,
  cycle: number | null,
  last: boolean,
): PlannedStep[] {
  const one = (plan: PlannedStep['plan']): PlannedStep[] => [{ plan, path: at, cycle }];
  if ('charge' in s) return one(planCharge(c, s.charge, `${at}.charge`));
  if ('rest' in s) return one(planRest(c, s.rest));
  if ('discharge' in s) return one(planDischarge(c, s.discharge, `${at}.discharge`));
  if ('storage' in s) {
    if (!last || cycle !== null)
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        'storage must be the last step of the program',
        `${c.where}, key ${at}`,
        'Move the storage step to the end, outside any repeat.',
      );
    return one(planStorage(c, s.storage.current_C, `${at}.storage`));
  }
  const out: PlannedStep[] = [];
  for (let pass = 1; pass <= s.repeat.times; pass++)
    s.repeat.steps.forEach((inner, i) =>
      out.push(...planStep(c, inner, `${at}.repeat.steps[${i}]`, pass, false)),
    );
  return out;
}

/** The plan of a program for this chemistry and cell count; throws CV_CONFIG_INVALID naming the key. */
export function planProgram(file: ProgramFile, ctx: PlanContext): Plan {
  validateCells(ctx.cells);
  const c: Ctx = { ...ctx, rated: ctx.ratedAh ?? file.rated_Ah ?? null };
  const steps = file.steps.flatMap((s, i) =>
    planStep(c, s, `steps[${i}]`, null, i === file.steps.length - 1),
  );
  return {
    name: file.name,
    cells: ctx.cells,
    ratedAh: c.rated,
    chemistryId: ctx.profile.id,
    steps,
  };
}
