import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Ajv, type ErrorObject } from 'ajv';
import { parseConfigYaml } from '../core/config-file.js';
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import type { ChemistryProfile, Sourced } from './chemistry-types.js';
import { SOURCED_FIELDS, type SourcedField } from './chemistries.js';
import {
  chargeSchema,
  checkChargeBlock,
  SOURCED_SCHEMA,
  toChargeLimits,
  type RawCharge,
} from './charge-limits.js';

/**
 * The chemistry file shipped with the package. Source (`src/chemistry/`) and build
 * (`dist/chemistry/`) both sit two levels below the package root, so one relative URL serves.
 */
export const DEFAULT_CHEMISTRIES_PATH: string = fileURLToPath(
  new URL('../../config/chemistries.yaml', import.meta.url),
);

const ID_PATTERN = '^[a-z0-9][a-z0-9-]{0,31}$';

const profileSchema = {
  type: 'object',
  additionalProperties: false,
  required: ['name', ...SOURCED_FIELDS, 'cautions'],
  properties: {
    name: { type: 'string', minLength: 1, maxLength: 80, pattern: '\\S' },
    nominal_V_per_cell: SOURCED_SCHEMA,
    cutoff_V_per_cell: SOURCED_SCHEMA,
    floor_V_per_cell: SOURCED_SCHEMA,
    max_rest_V_per_cell: SOURCED_SCHEMA,
    min_rest_V_per_cell: SOURCED_SCHEMA,
    max_temperature_C: SOURCED_SCHEMA,
    charge: chargeSchema,
    cautions: {
      type: 'array',
      minItems: 1,
      maxItems: 12,
      items: { type: 'string', minLength: 1, maxLength: 200, pattern: '\\S' },
    },
  },
} as const;

const fileSchema = {
  type: 'object',
  minProperties: 1,
  propertyNames: { pattern: ID_PATTERN },
  additionalProperties: profileSchema,
} as const;

const ajv = new Ajv({ allErrors: true, strict: true });
const validateFile = ajv.compile(fileSchema);

/** Turns a JSON pointer into the dotted key path a user sees in the YAML file. */
function keyPath(pointer: string, extra?: string): string {
  const parts = pointer
    .split('/')
    .slice(1)
    .map((p) => p.replace(/~1/g, '/').replace(/~0/g, '~'));
  if (extra !== undefined) parts.push(extra);
  return parts.length === 0 ? '(top level)' : parts.join('.');
}

function describeSchemaError(e: ErrorObject): { key: string; problem: string } {
  const params = e.params as Record<string, unknown>;
  switch (e.keyword) {
    case 'additionalProperties':
      return {
        key: keyPath(e.instancePath, String(params['additionalProperty'])),
        problem: 'is not a known key (check its spelling; unknown keys are refused)',
      };
    case 'required': {
      const missing = String(params['missingProperty']);
      const problem =
        missing === 'source'
          ? 'is missing: every value needs a source (a standard, "common practice" or "from memory")'
          : 'is missing';
      return { key: keyPath(e.instancePath, missing), problem };
    }
    case 'propertyNames':
      return {
        key: keyPath(e.instancePath, String(params['propertyName'])),
        problem: 'is not a valid chemistry id (lower-case letters, digits and "-", at most 32)',
      };
    case 'type':
      return {
        key: keyPath(e.instancePath),
        problem:
          params['type'] === 'number'
            ? 'must be a finite number (no quotes, no .nan or .inf)'
            : `must be of type ${String(params['type'])}`,
      };
    case 'maxLength':
    case 'maxItems':
      return {
        key: keyPath(e.instancePath),
        problem: `is too long (at most ${String(params['limit'])})`,
      };
    case 'minItems':
      return { key: keyPath(e.instancePath), problem: 'needs at least one entry' };
    case 'pattern':
    case 'minLength':
      return { key: keyPath(e.instancePath), problem: 'must not be empty' };
    default:
      return { key: keyPath(e.instancePath), problem: e.message ?? `fails "${e.keyword}"` };
  }
}

/** Most telling problems first: a bad id or an unknown key explains the "missing" ones after it. */
const KEYWORD_ORDER = ['propertyNames', 'additionalProperties', 'type'];

function schemaProblems(errors: readonly ErrorObject[]): { key: string; problem: string }[] {
  const badIds = new Set(
    errors
      .filter((e) => e.keyword === 'propertyNames')
      .map((e) => String(e.params['propertyName'])),
  );
  const rank = (e: ErrorObject): number => {
    const i = KEYWORD_ORDER.indexOf(e.keyword);
    return i === -1
      ? e.keyword === 'required'
        ? KEYWORD_ORDER.length + 1
        : KEYWORD_ORDER.length
      : i;
  };
  return (
    errors
      // the pattern failure inside propertyNames repeats what the propertyNames error says
      .filter((e) => e.propertyName === undefined)
      // nothing more to say about the fields of a profile whose id is itself invalid
      .filter((e) => {
        const first = e.instancePath.split('/')[1]?.replace(/~1/g, '/').replace(/~0/g, '~') ?? '';
        return e.instancePath === '' || !badIds.has(first);
      })
      .map((e, i) => ({ e, i }))
      .sort((a, b) => rank(a.e) - rank(b.e) || a.i - b.i)
      .map(({ e }) => describeSchemaError(e))
  );
}

function invalid(
  where: string,
  problems: { key: string; problem: string }[],
  fix: string,
): CellvigilError {
  const shown = problems.slice(0, 5).map((p) => `${p.key} ${p.problem}`);
  const more = problems.length > 5 ? `; and ${problems.length - 5} more` : '';
  const keys = [...new Set(problems.slice(0, 5).map((p) => p.key))].join(', ');
  return makeError(
    ErrorCodes.CONFIG_INVALID,
    `Chemistry file is invalid: ${shown.join('; ')}${more}`,
    `${where}, key ${keys}`,
    fix,
  );
}

interface RawSourced {
  value: number;
  source: string;
}
type RawProfile = { name: string; cautions: string[]; charge?: RawCharge } & Record<
  SourcedField,
  RawSourced
>;

/** Checks that hold between fields (the schema only sees one field at a time). */
function crossCheck(id: string, p: RawProfile): { key: string; problem: string }[] {
  const problems: { key: string; problem: string }[] = [];
  const v = (f: SourcedField): number => p[f].value;
  const need = (ok: boolean, f: SourcedField, problem: string): void => {
    if (!ok) problems.push({ key: `${id}.${f}.value`, problem });
  };
  for (const f of SOURCED_FIELDS) {
    need(Number.isFinite(v(f)), f, 'must be a finite number');
  }
  if (problems.length > 0) return problems;
  need(
    v('floor_V_per_cell') > 0,
    'floor_V_per_cell',
    `(${v('floor_V_per_cell')}) must be above 0 V`,
  );
  need(
    v('floor_V_per_cell') <= v('cutoff_V_per_cell'),
    'floor_V_per_cell',
    `(${v('floor_V_per_cell')} V) must not be above cutoff_V_per_cell (${v('cutoff_V_per_cell')} V)`,
  );
  need(
    v('cutoff_V_per_cell') < v('nominal_V_per_cell'),
    'cutoff_V_per_cell',
    `(${v('cutoff_V_per_cell')} V) must be below nominal_V_per_cell (${v('nominal_V_per_cell')} V)`,
  );
  need(
    v('nominal_V_per_cell') < v('max_rest_V_per_cell'),
    'max_rest_V_per_cell',
    `(${v('max_rest_V_per_cell')} V) must be above nominal_V_per_cell (${v('nominal_V_per_cell')} V)`,
  );
  need(
    v('min_rest_V_per_cell') >= 0,
    'min_rest_V_per_cell',
    `(${v('min_rest_V_per_cell')} V) must not be negative`,
  );
  need(
    v('min_rest_V_per_cell') < v('cutoff_V_per_cell'),
    'min_rest_V_per_cell',
    `(${v('min_rest_V_per_cell')} V) must be below cutoff_V_per_cell (${v('cutoff_V_per_cell')} V), ` +
      'so that a flat but healthy cell is told apart from a missing one',
  );
  need(
    v('max_temperature_C') > 0 && v('max_temperature_C') <= 100,
    'max_temperature_C',
    `(${v('max_temperature_C')} °C) must be above 0 and at most 100 °C`,
  );
  return problems;
}

function copySourced(s: RawSourced): Sourced {
  return { value: s.value, source: s.source.trim() };
}

/**
 * Parses and validates the text of a chemistry file. `where` names the file in messages.
 * Throws a CellvigilError (CV_CONFIG_INVALID, exit code 2) naming the file, the key and the fix.
 */
export function parseChemistries(text: string, where: string): ChemistryProfile[] {
  const data = parseConfigYaml(
    text,
    'chemistry file',
    where,
    'Fix the YAML syntax at the line shown (indentation, colons, quotes).',
  );
  if (data === null || typeof data !== 'object' || Array.isArray(data)) {
    throw invalid(
      where,
      [
        {
          key: '(top level)',
          problem:
            data === null
              ? 'is empty (or only comments); it must be a map of chemistry id to profile'
              : 'must be a map of chemistry id to profile',
        },
      ],
      'Start the file with a chemistry id such as "li-ion:" and indent its fields below it.',
    );
  }
  if (!validateFile(data)) {
    throw invalid(
      where,
      schemaProblems(validateFile.errors ?? []),
      'Correct the keys named; see the comments at the top of config/chemistries.yaml for the format.',
    );
  }
  const raw = data as Record<string, RawProfile>;
  const problems = Object.entries(raw).flatMap(([id, p]) => crossCheck(id, p));
  if (problems.length > 0) {
    throw invalid(
      where,
      problems,
      'Correct the values named so that floor <= cutoff < nominal < max_rest, min_rest < cutoff and ' +
        '0 < max_temperature_C <= 100.',
    );
  }
  const chargeProblems = Object.entries(raw).flatMap(([id, p]) =>
    p.charge === undefined
      ? []
      : checkChargeBlock(id, p.charge, {
          nominalV: p.nominal_V_per_cell.value,
          cutoffV: p.cutoff_V_per_cell.value,
          maxDischargeC: p.max_temperature_C.value,
        }),
  );
  if (chargeProblems.length > 0) {
    throw invalid(
      where,
      chargeProblems,
      'Correct the charge values named; the comments at the top of config/chemistries.yaml list what each method needs.',
    );
  }
  return Object.entries(raw).map(([id, p]) => ({
    id,
    name: p.name.trim(),
    nominal_V_per_cell: copySourced(p.nominal_V_per_cell),
    cutoff_V_per_cell: copySourced(p.cutoff_V_per_cell),
    floor_V_per_cell: copySourced(p.floor_V_per_cell),
    max_rest_V_per_cell: copySourced(p.max_rest_V_per_cell),
    min_rest_V_per_cell: copySourced(p.min_rest_V_per_cell),
    max_temperature_C: copySourced(p.max_temperature_C),
    cautions: p.cautions.map((c) => c.trim()),
    ...(p.charge !== undefined ? { charge: toChargeLimits(p.charge) } : {}),
  }));
}

/** Reads and validates a chemistry file (the shipped one unless told otherwise). */
export function loadChemistries(path: string | URL = DEFAULT_CHEMISTRIES_PATH): ChemistryProfile[] {
  const file = typeof path === 'string' ? path : fileURLToPath(path);
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    const what =
      code === 'ENOENT'
        ? 'Chemistry file not found'
        : `Chemistry file could not be read (${code ?? (err instanceof Error ? err.message : String(err))})`;
    throw makeError(
      ErrorCodes.CONFIG_READ,
      what,
      file,
      'Check the path, or leave the option out to use the chemistry file shipped with cellvigil.',
    );
  }
  return parseChemistries(text, file);
}
