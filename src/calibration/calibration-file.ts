import { open, rename, rm } from 'node:fs/promises';
import { Ajv, type SchemaObject } from 'ajv';
import { readConfigText } from '../core/config-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import {
  CALIBRATION_FORMAT,
  calibrationId,
  sealCalibration,
  type Calibration,
  type CalibrationContent,
} from './calibration.js';
import { checkCalibrationPlausible } from './plausible.js';

/* Reading, checking and writing the calibration file; the model it holds is in calibration.ts. */

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
      'Restore the file from the last `cellvigil calibrate` run, or calibrate again.',
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
