/**
 * result.json and checkpoint.json of a run folder (docs/run-folder.md), checked with schemas.
 * Open objects: later versions may add keys; the keys a recompute reads must have their types.
 */
import { readFile } from 'node:fs/promises';
import { Ajv, type SchemaObject } from 'ajv';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { RunResult } from '../run/result.js';

export interface Checkpoint {
  host_s: number;
  state: string;
  charge_Ah: number;
  energy_Wh: number;
  load_on_s?: number;
  frames_accepted?: number;
  frames_rejected?: number;
  frames_lost?: number;
  cutoff_V?: number;
  calibration_id?: string;
}

const num = { type: 'number' };
const count = { type: 'integer', minimum: 0 };
const figure = {
  type: 'object',
  required: ['standard', 'expanded', 'k'],
  properties: {
    standard: num,
    expanded: num,
    k: num,
    basis: { type: 'string' },
    terms: { type: 'array' },
  },
};

const RESULT_SCHEMA: SchemaObject = {
  type: 'object',
  required: ['capacity_Ah', 'energy_Wh', 'duration_s', 'end_reason', 'calibration_id'],
  properties: {
    capacity_Ah: num,
    energy_Wh: num,
    duration_s: num,
    end_reason: { type: 'string' },
    mean_voltage_V: { type: ['number', 'null'] },
    end_voltage_V: { type: ['number', 'null'] },
    cutoff_V: num,
    frames_accepted: count,
    frames_rejected: count,
    frames_lost: count,
    rig_clock_error_ppm: { type: ['number', 'null'] },
    calibration_id: { type: 'string' },
    uncertainty: { type: 'object', properties: { capacity_Ah: figure, energy_Wh: figure } },
  },
};

const CHECKPOINT_SCHEMA: SchemaObject = {
  type: 'object',
  required: ['host_s', 'state', 'charge_Ah', 'energy_Wh'],
  properties: {
    host_s: num,
    state: { type: 'string' },
    charge_Ah: num,
    energy_Wh: num,
    load_on_s: num,
    frames_accepted: count,
    frames_rejected: count,
    frames_lost: count,
    cutoff_V: num,
    calibration_id: { type: 'string' },
  },
};

const ajv = new Ajv({ allErrors: true, strict: true, strictRequired: false });
const validateResult = ajv.compile(RESULT_SCHEMA);
const validateCheckpoint = ajv.compile(CHECKPOINT_SCHEMA);

async function readOptional(path: string): Promise<string | null> {
  try {
    return await readFile(path, 'utf8');
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot read the file: ${(e as Error).message}`,
      path,
      'Check the permissions of the run folder.',
    );
  }
}

function parseChecked<T>(text: string, path: string, check: typeof validateResult, fix: string): T {
  let data: unknown;
  try {
    data = JSON.parse(text);
  } catch (e) {
    throw makeError(ErrorCodes.RUN_DATA, `not valid JSON: ${(e as Error).message}`, path, fix);
  }
  if (!check(data)) {
    const problems = (check.errors ?? []).map(
      (e) =>
        `${e.instancePath.split('/').filter(Boolean).join('.') || '(top level)'} ${e.message ?? 'is invalid'}`,
    );
    throw makeError(ErrorCodes.RUN_DATA, `malformed: ${problems.join('; ')}`, path, fix);
  }
  return data as T;
}

/** result.json, or null when the run has none (it was interrupted). */
export async function readResultFile(path: string): Promise<RunResult | null> {
  const text = await readOptional(path);
  return text === null
    ? null
    : parseChecked<RunResult>(
        text,
        path,
        validateResult,
        'Move the damaged file aside; `cellvigil report` then writes a new result.json from the raw counts.',
      );
}

/** checkpoint.json, or null when there is none. */
export async function readCheckpointFile(path: string): Promise<Checkpoint | null> {
  const text = await readOptional(path);
  return text === null
    ? null
    : parseChecked<Checkpoint>(
        text,
        path,
        validateCheckpoint,
        'Move the damaged file aside; the report does not need it (it only fills in counts the samples cannot give).',
      );
}
