/*
 * The `charge` block of a chemistry profile: its schema, the checks between its fields, and the
 * ceilings every charge request passes through. A program, an option or a live command reaches
 * a charge voltage, current or time only through resolveCharge, and nothing there can be
 * loosened by the caller: a looser cell needs its own profile with its maker's datasheet named.
 */
import { ErrorCodes, makeError, type ErrorCode } from '../core/errors.js';
import { meaningful } from '../core/meaningful.js';
import type { ChargeLimits, ChemistryProfile, Sourced } from './chemistry-types.js';

/** A value with the source it comes from (a profile's every limit is one). */
export const SOURCED_SCHEMA = {
  type: 'object',
  additionalProperties: false,
  required: ['value', 'source'],
  properties: {
    value: { type: 'number' },
    source: { type: 'string', minLength: 1, maxLength: 120, pattern: '\\S' },
  },
} as const;

export const CHARGE_FIELDS = [
  'max_V_per_cell',
  'min_temperature_C',
  'max_temperature_C',
  'default_current_C',
  'max_current_C',
  'timeout_h',
  'termination_current_C',
  'storage_V_per_cell',
] as const;
export type ChargeField = (typeof CHARGE_FIELDS)[number];

/** The schema of a profile's `charge` key (ajv, strict). */
export const chargeSchema = {
  type: 'object',
  additionalProperties: false,
  required: ['method', 'source'],
  properties: {
    method: { type: 'string', enum: ['cc-cv', 'charger', 'none'] },
    source: { type: 'string', minLength: 1, maxLength: 120, pattern: '\\S' },
    max_V_per_cell: SOURCED_SCHEMA,
    min_temperature_C: SOURCED_SCHEMA,
    max_temperature_C: SOURCED_SCHEMA,
    default_current_C: SOURCED_SCHEMA,
    max_current_C: SOURCED_SCHEMA,
    timeout_h: SOURCED_SCHEMA,
    termination_current_C: SOURCED_SCHEMA,
    storage_V_per_cell: SOURCED_SCHEMA,
  },
} as const;

export type RawCharge = { method: ChargeLimits['method']; source: string } & Partial<
  Record<ChargeField, Sourced>
>;

/** What a profile's other fields say a charge block must agree with. */
export interface ChargeContext {
  nominalV: number;
  cutoffV: number;
  maxDischargeC: number;
}

type Problem = { key: string; problem: string };

const NEEDED: Record<'cc-cv' | 'charger', readonly ChargeField[]> = {
  'cc-cv': CHARGE_FIELDS.filter((f) => f !== 'storage_V_per_cell'),
  charger: CHARGE_FIELDS.filter((f) => f !== 'termination_current_C' && f !== 'storage_V_per_cell'),
};

function presence(id: string, c: RawCharge): Problem[] {
  const key = (f: string): string => `${id}.charge.${f}`;
  if (c.method === 'none') {
    return CHARGE_FIELDS.filter((f) => c[f] !== undefined).map((f) => ({
      key: key(f),
      problem: 'must not be given with method none (the cell must never be charged)',
    }));
  }
  const out = NEEDED[c.method]
    .filter((f) => c[f] === undefined)
    .map((f) => ({ key: key(f), problem: `is missing for method ${c.method}` }));
  if (c.method === 'charger' && c.termination_current_C !== undefined)
    out.push({
      key: key('termination_current_C'),
      problem: 'applies to cc-cv only; a charger-terminated charge ends by the charger',
    });
  return out;
}

/** Checks between the charge fields and the rest of the profile; [] when all hold. */
export function checkChargeBlock(id: string, c: RawCharge, ctx: ChargeContext): Problem[] {
  const missing = presence(id, c);
  if (missing.length > 0 || c.method === 'none') return missing;
  const v = (f: ChargeField): number => c[f]?.value ?? NaN;
  const out: Problem[] = [];
  const need = (ok: boolean, f: ChargeField, problem: string): void => {
    if (!ok) out.push({ key: `${id}.charge.${f}.value`, problem: `(${v(f)}) ${problem}` });
  };
  need(v('max_V_per_cell') > ctx.nominalV, 'max_V_per_cell', 'must be above the nominal voltage');
  need(
    v('min_temperature_C') < v('max_temperature_C'),
    'min_temperature_C',
    'must be below charge.max_temperature_C',
  );
  need(
    v('max_temperature_C') <= ctx.maxDischargeC,
    'max_temperature_C',
    'must not be above the profile max_temperature_C',
  );
  need(v('max_current_C') > 0 && v('max_current_C') <= 5, 'max_current_C', 'must be in (0, 5] C');
  need(
    v('default_current_C') > 0 && v('default_current_C') <= v('max_current_C'),
    'default_current_C',
    'must be above 0 and at most max_current_C',
  );
  need(v('timeout_h') > 0 && v('timeout_h') <= 48, 'timeout_h', 'must be in (0, 48] h');
  if (c.termination_current_C !== undefined)
    need(
      v('termination_current_C') > 0 && v('termination_current_C') < v('default_current_C'),
      'termination_current_C',
      'must be above 0 and below default_current_C',
    );
  if (c.storage_V_per_cell !== undefined)
    need(
      v('storage_V_per_cell') > ctx.cutoffV && v('storage_V_per_cell') <= v('max_V_per_cell'),
      'storage_V_per_cell',
      'must be above the cutoff and at most max_V_per_cell',
    );
  return out;
}

const copy = (s: Sourced): Sourced => ({ value: s.value, source: s.source.trim() });

/** The typed charge block of a raw one that passed the schema and checkChargeBlock. */
export function toChargeLimits(c: RawCharge): ChargeLimits {
  if (c.method === 'none') return { method: 'none', source: c.source.trim() };
  const req = (f: ChargeField): Sourced => copy(c[f]!);
  const opt = (f: ChargeField): Partial<Record<ChargeField, Sourced>> =>
    c[f] !== undefined ? { [f]: copy(c[f]) } : {};
  return {
    method: c.method,
    source: c.source.trim(),
    max_V_per_cell: req('max_V_per_cell'),
    min_temperature_C: req('min_temperature_C'),
    max_temperature_C: req('max_temperature_C'),
    default_current_C: req('default_current_C'),
    max_current_C: req('max_current_C'),
    timeout_h: req('timeout_h'),
    ...opt('termination_current_C'),
    ...opt('storage_V_per_cell'),
  };
}

/** A chargeable profile's limits, as a narrowed type. */
export type ChargeableLimits = Exclude<ChargeLimits, { method: 'none' }>;

/** A charge asked for; every field optional (the profile's default is taken). */
export interface ChargeRequest {
  /** How the charge ends; the profile's method unless given. */
  until?: 'cc-cv' | 'charger';
  /** CV voltage per cell (cc-cv only; a charger-terminated charge has none to set). */
  V_per_cell?: number;
  current_C?: number;
  timeout_h?: number;
  /** CC-CV only: end the CV phase at this current instead of the profile's. */
  termination_C?: number;
}

/** A charge after the ceilings: what a run may do, with nothing left to choose. */
export interface ResolvedCharge {
  method: 'cc-cv' | 'charger';
  /** CV voltage for cc-cv; the abort ceiling for a charger-terminated charge. */
  V_per_cell: number;
  current_C: number;
  timeout_h: number;
  /** Termination current for cc-cv; null for a charger-terminated charge. */
  termination_C: number | null;
  minTemperatureC: number;
  maxTemperatureC: number;
}

/** Room for float rounding, so that 4.2 asked is not refused as 4.2000000001. */
const EPS = 1e-9;

/** The limits a charge of this profile obeys, or throws when the profile cannot be charged. */
export function chargeableLimits(
  p: ChemistryProfile,
  where: string,
  code: ErrorCode = ErrorCodes.CONFIG_INVALID,
): ChargeableLimits {
  if (p.charge === undefined)
    throw makeError(
      code,
      `the ${p.id} profile has no charge limits, so nothing may charge it`,
      where,
      `Add a charge block to the ${p.id} profile (docs/chemistry-profiles.md), with its sources.`,
    );
  if (p.charge.method === 'none')
    throw makeError(
      code,
      `${p.name} cells must never be charged (${p.charge.source})`,
      where,
      'Remove the charge and storage steps; a primary cell can only be discharged.',
    );
  return p.charge;
}

/**
 * Applies the profile's ceilings to a charge request. Anything above a ceiling is refused, not
 * clipped: a program asking 4.3 V per cell of a 4.2 V chemistry is a wrong program.
 */
export function resolveCharge(
  p: ChemistryProfile,
  req: ChargeRequest,
  where: string,
  code: ErrorCode = ErrorCodes.CONFIG_INVALID,
): ResolvedCharge {
  const c = chargeableLimits(p, where, code);
  const method = req.until ?? c.method;
  if (method === 'cc-cv' && c.method === 'charger')
    throw makeError(
      code,
      `a ${p.id} charge is ended by the charger (${c.source}), not by a voltage and a current`,
      `${where}, key until`,
      'Use `until: charger` (or a timed charge) for this chemistry.',
    );
  const over = (key: string, asked: number, ceiling: Sourced, unit: string): void => {
    const c = `${meaningful(ceiling.value)} ${unit}`;
    if (!(asked > 0))
      throw makeError(
        code,
        `${key} ${String(asked)} ${unit} is not a positive number`,
        `${where}, key ${key}`,
        `Give a value above 0 and at most ${c}.`,
      );
    if (asked > ceiling.value + EPS)
      throw makeError(
        code,
        `${key} ${meaningful(asked)} ${unit} is above the ${p.id} ceiling of ${c} (source: ${ceiling.source})`,
        `${where}, key ${key}`,
        `Ask ${c} or less; no option lifts this ceiling. A cell whose maker allows more needs its own chemistry profile naming that datasheet.`,
      );
  };
  if (req.V_per_cell !== undefined && method === 'charger')
    throw makeError(
      code,
      `a ${p.id} charge ends by the charger, so a charge voltage cannot be set`,
      `${where}, key V_per_cell`,
      'Remove V_per_cell, or use `until: charger`.',
    );
  const V = req.V_per_cell ?? c.max_V_per_cell.value;
  over('V_per_cell', V, c.max_V_per_cell, 'V');
  const current = req.current_C ?? c.default_current_C.value;
  over('current_C', current, c.max_current_C, 'C');
  const timeout = req.timeout_h ?? c.timeout_h.value;
  over('timeout_h', timeout, c.timeout_h, 'h');
  const termination = resolveTermination(
    c,
    method,
    req,
    current,
    `${where}, key termination_C`,
    code,
  );
  return {
    method,
    V_per_cell: V,
    current_C: current,
    timeout_h: timeout,
    termination_C: termination,
    minTemperatureC: c.min_temperature_C.value,
    maxTemperatureC: c.max_temperature_C.value,
  };
}

/**
 * A termination current is no ceiling (a higher one ends the charge sooner), but one at or above
 * the charge current would end the charge before it begins, and one of zero never ends it.
 */
function resolveTermination(
  c: ChargeableLimits,
  method: 'cc-cv' | 'charger',
  req: ChargeRequest,
  currentC: number,
  where: string,
  code: ErrorCode,
): number | null {
  if (method === 'charger') {
    if (req.termination_C === undefined) return null;
    throw makeError(
      code,
      'a charger-terminated charge has no termination current to set',
      where,
      'Remove termination_C; the charger ends the charge itself.',
    );
  }
  const t = req.termination_C ?? c.termination_current_C!.value;
  if (t > 0 && t < currentC) return t;
  throw makeError(
    code,
    `termination current ${meaningful(t)} C is not between 0 and the charge current ${meaningful(currentC)} C`,
    where,
    `Give a termination current below the charge current, e.g. ${meaningful(c.termination_current_C!.value)} C (the profile's).`,
  );
}
