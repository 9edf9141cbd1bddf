/**
 * The calibration file (docs/calibration.md): reference points and straight-line fits
 * that correct the analog chain's nominal values, identified by a content id that every logged
 * sample carries.
 */
import { createHash } from 'node:crypto';
import { open, rename, rm } from 'node:fs/promises';
import { Ajv, type SchemaObject } from 'ajv';
import { readConfigText } from '../core/config-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { fitLine, fitOffset, type FitOptions, type LinearFit } from './fit.js';
import { checkCalibrationPlausible } from './plausible.js';

export const CALIBRATION_FORMAT = 1;

export type Quantity = 'voltage' | 'current' | 'temperature';

export interface CalibrationPoint {
  /** Mean raw ADC count over the averaging window. */
  raw_mean: number;
  /** Standard deviation of the raw counts in the window. */
  raw_sd?: number;
  /** Number of frames averaged. */
  samples?: number;
  /** The chain's nominal value for raw_mean (V, A or °C). */
  nominal: number;
  /**
   * Standard uncertainty of `nominal` from the averaging (standard error of the mean count,
   * with quantisation when the noise is too small to dither), in the same unit.
   */
  nominal_u?: number;
  /** The reference instrument's reading. */
  reference: number;
  /** Standard uncertainty of the reference reading (same unit). */
  reference_u: number;
}

export interface QuantityFit extends LinearFit {
  /** `offset`: gain held at 1 (e.g. a thermistor checked at one temperature). */
  model: 'gain_offset' | 'offset';
}

export interface QuantityCalibration {
  points: CalibrationPoint[];
  fit: QuantityFit;
}

/** Everything in a calibration file except its id. */
export interface CalibrationContent {
  format: typeof CALIBRATION_FORMAT;
  rig: string;
  /** ISO 8601 date and time of the calibration. */
  date: string;
  /** The reference instrument: make, model, range, and its own calibration if known. */
  reference_instrument: string;
  voltage?: QuantityCalibration;
  current?: QuantityCalibration;
  temperature?: QuantityCalibration;
}

export interface Calibration extends CalibrationContent {
  /** First 16 hex digits of the sha256 of the canonical JSON of everything else. */
  id: string;
}

/** Turns nominal values into corrected ones; pure and cheap, applied to every sample. */
export interface Corrector {
  /** The calibration id, or 'none' when uncalibrated. */
  readonly id: string;
  voltage(nominal: number): number;
  current(nominal: number): number;
  temperature(nominal: number): number;
}

const finite = { type: 'number' };
const nonNegative = { type: 'number', minimum: 0 };
const QUANTITY_SCHEMA: SchemaObject = {
  type: 'object',
  additionalProperties: false,
  required: ['points', 'fit'],
  properties: {
    points: {
      type: 'array',
      minItems: 1,
      items: {
        type: 'object',
        additionalProperties: false,
        required: ['raw_mean', 'nominal', 'reference', 'reference_u'],
        properties: {
          raw_mean: finite,
          raw_sd: nonNegative,
          samples: { type: 'integer', minimum: 1 },
          nominal: finite,
          nominal_u: nonNegative,
          reference: finite,
          reference_u: nonNegative,
        },
      },
    },
    fit: {
      type: 'object',
      additionalProperties: false,
      required: [
        'model',
        'gain',
        'offset',
        'u_gain',
        'u_offset',
        'cov_gain_offset',
        'residual_sd',
        'dof',
      ],
      properties: {
        model: { enum: ['gain_offset', 'offset'] },
        gain: { type: 'number', exclusiveMinimum: 0 },
        offset: finite,
        u_gain: nonNegative,
        u_offset: nonNegative,
        cov_gain_offset: finite,
        residual_sd: nonNegative,
        dof: { type: 'integer', minimum: 0 },
      },
    },
  },
};

const SCHEMA: SchemaObject = {
  type: 'object',
  additionalProperties: false,
  required: ['format', 'id', 'rig', 'date', 'reference_instrument'],
  properties: {
    format: { const: CALIBRATION_FORMAT },
    id: { type: 'string', pattern: '^[0-9a-f]{16}$' },
    rig: { type: 'string', minLength: 1 },
    date: { type: 'string', minLength: 1 },
    reference_instrument: { type: 'string', minLength: 1 },
    voltage: QUANTITY_SCHEMA,
    current: QUANTITY_SCHEMA,
    temperature: QUANTITY_SCHEMA,
  },
};

const validate = new Ajv({ allErrors: true, strict: true }).compile(SCHEMA);

/** JSON with object keys sorted at every level and no whitespace: the same content, the same text. */
export function canonicalJson(value: unknown): string {
  if (Array.isArray(value)) return `[${value.map(canonicalJson).join(',')}]`;
  if (value !== null && typeof value === 'object') {
    const entries = Object.entries(value as Record<string, unknown>)
      .filter(([, v]) => v !== undefined)
      .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
    return `{${entries.map(([k, v]) => `${JSON.stringify(k)}:${canonicalJson(v)}`).join(',')}}`;
  }
  return JSON.stringify(value);
}

/** The content id of a calibration: ignores any `id` already present. */
export function calibrationId(cal: CalibrationContent | Calibration): string {
  const { id: _ignored, ...content } = cal as Calibration;
  return createHash('sha256').update(canonicalJson(content)).digest('hex').slice(0, 16);
}

/** Adds the content id. */
export function sealCalibration(content: CalibrationContent): Calibration {
  return { id: calibrationId(content), ...content };
}

/**
 * Fits one quantity's points: gain and offset, or offset only. The residual of each point is
 * recomputable from the stored fit, so it is not stored twice. A point's weight comes from the
 * reference's uncertainty combined with the nominal's (effective variance: the gain is close
 * to 1 by construction, so the nominal's u counts one for one).
 */
export function fitQuantity(
  quantity: Quantity,
  points: readonly CalibrationPoint[],
  model: QuantityFit['model'],
  where = `${quantity} calibration`,
): { calibration: QuantityCalibration; outliers: number[]; standardized: number[] } {
  const xy = points.map((p) => ({
    x: p.nominal,
    y: p.reference,
    u: Math.hypot(p.reference_u, p.nominal_u ?? 0),
  }));
  const options: FitOptions = { quantity, where };
  const r = model === 'gain_offset' ? fitLine(xy, options) : fitOffset(xy, options);
  const fit: QuantityFit = {
    model,
    gain: r.gain,
    offset: r.offset,
    u_gain: r.u_gain,
    u_offset: r.u_offset,
    cov_gain_offset: r.cov_gain_offset,
    residual_sd: r.residual_sd,
    dof: r.dof,
  };
  return {
    calibration: { points: points.map((p) => ({ ...p })), fit },
    outliers: r.outliers,
    standardized: r.standardized,
  };
}

/** Parses and checks calibration JSON, including that its id matches its content. */
export function parseCalibration(text: string, where: string): Calibration {
  let data: unknown;
  try {
    data = JSON.parse(text);
  } catch (err) {
    const what =
      text.trim() === ''
        ? 'the calibration file is empty'
        : `the calibration file is not valid JSON: ${jsonSyntaxDetail(text, err as Error)}`;
    throw makeError(
      ErrorCodes.CALIBRATION_INVALID,
      what,
      where,
      'Restore the file from the last `cellvigil calibrate` run, or calibrate again.',
    );
  }
  if (!validate(data)) {
    const problems = (validate.errors ?? []).map((e) => {
      const path = e.instancePath.split('/').slice(1).join('.') || '(top level)';
      const params = e.params as Record<string, unknown>;
      const got = `, got ${JSON.stringify(valueAt(data, e.instancePath)) ?? 'nothing'}`;
      switch (e.keyword) {
        case 'additionalProperties':
          return `${path} ${e.message ?? 'is invalid'} (${String(params['additionalProperty'])})`;
        case 'required':
          return `${path} ${e.message ?? 'is invalid'}`;
        case 'const':
          return `${path} must be ${JSON.stringify(params['allowedValue'])}${got}`;
        case 'enum':
          return `${path} must be one of ${(params['allowedValues'] as unknown[]).map((v) => JSON.stringify(v)).join(', ')}${got}`;
        default:
          return `${path} ${e.message ?? 'is invalid'}${got}`;
      }
    });
    throw makeError(
      ErrorCodes.CALIBRATION_INVALID,
      `the calibration file is malformed: ${problems.join('; ')}`,
      where,
      'Restore the file from the last `cellvigil calibrate` run, or calibrate again; the previous calibration stays in force.',
    );
  }
  const cal = data as Calibration;
  checkCalibrationPlausible(cal, where);
  const computed = calibrationId(cal);
  if (computed !== cal.id) {
    throw makeError(
      ErrorCodes.CALIBRATION_INVALID,
      `the calibration id ${cal.id} does not match the file's content (its content gives ${computed}); the file was edited after it was written`,
      where,
      `Undo the edit, or calibrate again; if the edit is intended, set "id" to "${computed}" so that samples name the calibration that made them.`,
    );
  }
  return cal;
}

/** The value a JSON pointer from the validator points at. */
function valueAt(data: unknown, pointer: string): unknown {
  let v = data;
  for (const raw of pointer.split('/').slice(1)) {
    const key = raw.replace(/~1/g, '/').replace(/~0/g, '~');
    v = v !== null && typeof v === 'object' ? (v as Record<string, unknown>)[key] : undefined;
  }
  return v;
}

/** JSON.parse's complaint, with the line and column where Node gives only a character position. */
function jsonSyntaxDetail(text: string, err: Error): string {
  const m = /at position (\d+)/.exec(err.message);
  if (!m || /line/.test(err.message)) return err.message;
  const before = text.slice(0, Number(m[1]));
  const line = before.split('\n').length;
  return `${err.message} (line ${line}, column ${before.length - before.lastIndexOf('\n')})`;
}

/** Reads and checks a calibration file. */
export async function loadCalibration(path: string): Promise<Calibration> {
  const text = await readConfigText(
    path,
    'calibration file',
    'Check the path given with --calibration, or run `cellvigil calibrate` to make one.',
  );
  return parseCalibration(text, path);
}

/**
 * Writes a calibration with a fresh content id, atomically: a reader (or the daemon's reload)
 * sees either the old file or the complete new one, never a partial write.
 */
export async function writeCalibration(
  path: string,
  content: CalibrationContent,
): Promise<Calibration> {
  const cal = sealCalibration(stripId(content));
  const text = `${JSON.stringify(cal, null, 2)}\n`;
  // Refuse to write what could not be read back.
  parseCalibration(text, path);
  const tmp = `${path}.${process.pid}.tmp`;
  try {
    const handle = await open(tmp, 'w');
    try {
      await handle.writeFile(text, 'utf8');
      await handle.sync();
    } finally {
      await handle.close();
    }
    await rename(tmp, path);
  } catch (err) {
    await rm(tmp, { force: true });
    throw makeError(
      ErrorCodes.CALIBRATION_WRITE,
      `cannot write the calibration file: ${(err as Error).message}`,
      path,
      'Check that the folder exists and is writable.',
    );
  }
  return cal;
}

function stripId(content: CalibrationContent | Calibration): CalibrationContent {
  const { id: _ignored, ...rest } = content as Calibration;
  return rest;
}

const identity = (x: number): number => x;

function line(q: QuantityCalibration | undefined): (x: number) => number {
  if (!q) return identity;
  const { gain, offset } = q.fit;
  return (x) => gain * x + offset;
}

/** A corrector for `cal`; with null, values pass through unchanged and the id is 'none'. */
export function applyCalibration(cal: Calibration | null): Corrector {
  if (!cal) return { id: 'none', voltage: identity, current: identity, temperature: identity };
  return {
    id: cal.id,
    voltage: line(cal.voltage),
    current: line(cal.current),
    temperature: line(cal.temperature),
  };
}
