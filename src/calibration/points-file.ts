/**
 * The points file of `cellvigil calibrate --points` / `--from-points` (YAML or JSON): which
 * conditions to capture and what the reference meter read at each, so a calibration can be
 * taken without prompts. Format in docs/calibration.md.
 */
import { Ajv, type ErrorObject, type SchemaObject } from 'ajv';
import { stringify as stringifyYaml } from 'yaml';
import { parseConfigYaml, readConfigText } from '../core/config-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { UNITS, type CalibrationPoint, type Quantity } from './calibration.js';
import { parseAccuracy } from './reference-accuracy.js';

export interface PointSpec {
  /** 1-based position in the file, for messages. */
  index: number;
  quantity: Quantity;
  /** The condition to set: load on or off; null when not stated (allowed with raw_mean only). */
  load: boolean | null;
  /** The reference reading, or the simulator's true value (simulation only). */
  reference: number | 'truth';
  /** Standard uncertainty of the reference; 0 for `truth`. */
  referenceU: number;
  /** How referenceU was obtained. */
  referenceBasis: string;
  /** Averaging window for this point, s (overrides --seconds). */
  seconds?: number;
  /** An already captured raw mean (for --from-points). */
  raw?: { mean: number; sd?: number; samples?: number };
  note?: string;
}

/** What a saved point keeps of a captured one. */
export type CapturedPoint = Pick<
  CalibrationPoint,
  'raw_mean' | 'raw_sd' | 'samples' | 'reference' | 'reference_u'
>;

export interface PointsFile {
  file: string;
  referenceInstrument?: string;
  points: PointSpec[];
}

const POINT: SchemaObject = {
  type: 'object',
  additionalProperties: false,
  required: ['quantity', 'reference'],
  properties: {
    quantity: { enum: ['voltage', 'current', 'temperature'] },
    load: { enum: ['on', 'off'] },
    reference: { anyOf: [{ type: 'number' }, { const: 'truth' }] },
    u: { type: 'number', minimum: 0 },
    accuracy: { type: 'string', minLength: 1 },
    seconds: { type: 'number', exclusiveMinimum: 0, maximum: 600 },
    raw_mean: { type: 'number' },
    raw_sd: { type: 'number', minimum: 0 },
    samples: { type: 'integer', minimum: 1 },
    note: { type: 'string' },
  },
};

const SCHEMA: SchemaObject = {
  anyOf: [
    { type: 'array', minItems: 1, items: POINT },
    {
      type: 'object',
      additionalProperties: false,
      required: ['points'],
      properties: {
        reference_instrument: { type: 'string', minLength: 1 },
        points: { type: 'array', minItems: 1, items: POINT },
      },
    },
  ],
};

const validate = new Ajv({ allErrors: true, strict: true, strictTypes: false }).compile(SCHEMA);

interface RawPoint {
  quantity: Quantity;
  load?: 'on' | 'off';
  reference: number | 'truth';
  u?: number;
  accuracy?: string;
  seconds?: number;
  raw_mean?: number;
  raw_sd?: number;
  samples?: number;
  note?: string;
}

export async function loadPointsFile(path: string): Promise<PointsFile> {
  const text = await readConfigText(
    path,
    'points file',
    'Check the path given with --points or --from-points.',
  );
  return parsePointsFile(text, path);
}

/** Parses and checks a points file; every problem names the point and the key. */
export function parsePointsFile(text: string, file: string): PointsFile {
  const data = parseConfigYaml(text, 'points file', file, 'Fix the syntax at the line shown.');
  if (!validate(data)) {
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      `the points file is malformed: ${describe(validate.errors ?? [], data)}`,
      file,
      'Each point needs quantity (voltage, current or temperature), reference (a number) and u or accuracy; load is on or off. See docs/calibration.md.',
    );
  }
  const list = (Array.isArray(data) ? data : (data as { points: RawPoint[] }).points) as RawPoint[];
  const instrument = Array.isArray(data)
    ? undefined
    : (data as { reference_instrument?: string }).reference_instrument;
  const points = list.map((p, k) => toSpec(p, k + 1, file));
  return { file, ...(instrument !== undefined ? { referenceInstrument: instrument } : {}), points };
}

function toSpec(p: RawPoint, index: number, file: string): PointSpec {
  const where = `${file}, point ${index} (${p.quantity})`;
  const unit = UNITS[p.quantity];
  if (p.u !== undefined && p.accuracy !== undefined) {
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      'the point gives both u and accuracy',
      where,
      'Keep one: u (a standard uncertainty) or accuracy (the meter\'s limits, e.g. "0.5%+0.002").',
    );
  }
  let referenceU: number;
  let referenceBasis: string;
  if (p.reference === 'truth') {
    if (p.u !== undefined || p.accuracy !== undefined) {
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        'a truth reference has no uncertainty to state',
        where,
        'Remove u / accuracy from this point.',
      );
    }
    referenceU = 0;
    referenceBasis = "the simulator's true value (exact)";
  } else if (p.u !== undefined) {
    referenceU = p.u;
    referenceBasis = `standard uncertainty ${p.u} ${unit}`;
  } else if (p.accuracy !== undefined) {
    ({ u: referenceU, basis: referenceBasis } = parseAccuracy(
      p.accuracy,
      p.reference,
      `${where}, key accuracy`,
      unit,
    ));
  } else {
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      'the point states no uncertainty for its reference reading',
      where,
      `Add accuracy (the meter's limits for this range, e.g. "0.5%+0.002") or u (a standard uncertainty in ${unit}); for a current point with the load off, reference 0 with u 0 is exact.`,
    );
  }
  const spec: PointSpec = {
    index,
    quantity: p.quantity,
    load: p.load === undefined ? null : p.load === 'on',
    reference: p.reference,
    referenceU,
    referenceBasis,
  };
  if (p.seconds !== undefined) spec.seconds = p.seconds;
  if (p.note !== undefined) spec.note = p.note;
  if (p.raw_mean !== undefined) {
    spec.raw = { mean: p.raw_mean };
    if (p.raw_sd !== undefined) spec.raw.sd = p.raw_sd;
    if (p.samples !== undefined) spec.raw.samples = p.samples;
  } else if (p.raw_sd !== undefined || p.samples !== undefined) {
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      'raw_sd or samples without raw_mean',
      where,
      'Give raw_mean as well, or remove them.',
    );
  }
  return spec;
}

function describe(errors: readonly ErrorObject[], data: unknown): string {
  // The array and mapping forms fail differently; report against the form that was used.
  const form = Array.isArray(data) ? '/anyOf/0' : '/anyOf/1';
  const own = errors.filter(
    (e) => e.schemaPath.startsWith(`#${form}`) && !e.schemaPath.includes('/reference/anyOf'),
  );
  const refErrors = errors.some((e) => e.schemaPath.includes('/reference/anyOf'));
  const parts = own.map((e) => {
    const path = e.instancePath.split('/').slice(1).join('.') || '(top level)';
    if (e.keyword === 'additionalProperties')
      return `${path} has an unknown key ${String((e.params as { additionalProperty: string }).additionalProperty)}`;
    if (e.keyword === 'enum')
      return `${path} must be one of ${(e.params as { allowedValues: unknown[] }).allowedValues.join(', ')}`;
    return `${path} ${e.message ?? 'is invalid'}`;
  });
  if (refErrors) parts.push('a reference must be a number (or "truth" with --sim)');
  if (parts.length === 0)
    parts.push(
      Array.isArray(data) || (data !== null && typeof data === 'object')
        ? 'see the format'
        : 'it must be a list of points or a mapping with "points"',
    );
  return [...new Set(parts)].join('; ');
}

/**
 * The points file for `--from-points` from points already captured: raw means with their spread
 * next to the reference readings, so that a refused fit can be mended and fitted again without
 * taking the points anew. The inverse of parsePointsFile for those keys.
 */
export function formatPointsFile(
  points: Partial<Record<Quantity, readonly CapturedPoint[]>>,
  referenceInstrument: string | null,
): string {
  const list: Record<string, unknown>[] = [];
  for (const quantity of ['voltage', 'current', 'temperature'] as const) {
    for (const p of points[quantity] ?? []) {
      const row: Record<string, unknown> = {
        quantity,
        reference: p.reference,
        u: p.reference_u,
        raw_mean: p.raw_mean,
      };
      if (p.raw_sd !== undefined) row['raw_sd'] = p.raw_sd;
      if (p.samples !== undefined) row['samples'] = p.samples;
      list.push(row);
    }
  }
  const doc: Record<string, unknown> = {};
  if (referenceInstrument !== null) doc['reference_instrument'] = referenceInstrument;
  doc['points'] = list;
  return (
    '# Points captured by `cellvigil calibrate`; mend a reading, then fit with --from-points.\n' +
    stringifyYaml(doc, { lineWidth: 0 })
  );
}
