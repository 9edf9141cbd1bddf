/**
 * checkpoint.json: the run's totals and state, replaced atomically every few seconds so that an
 * interrupted run can be resumed and reported. Written by the run's recorder, read by resume and
 * the report, through this one type and schema.
 */
import { join } from 'node:path';
import { Ajv, type SchemaObject } from 'ajv';
import { writeJsonAtomic } from '../sinks/atomic-json.js';
import { parseChecked, readOptional } from './json-file.js';

export interface Checkpoint {
  host_s: number;
  wall_time: string;
  state: string;
  charge_Ah: number;
  energy_Wh: number;
  load_on_s: number;
  bridged_Ah: number;
  frames_accepted: number;
  frames_rejected: number;
  frames_lost: number;
  rows_written: number;
  /** The sample file being written, or null before the first row. */
  sample_file: string | null;
  cutoff_V: number;
  calibration_id: string;
}

export const CHECKPOINT_FILE = 'checkpoint.json';

const num = { type: 'number' };
const count = { type: 'integer', minimum: 0 };
const text = { type: 'string' };

// Open: later versions may add keys.
const SCHEMA: SchemaObject = {
  type: 'object',
  required: [
    'host_s',
    'wall_time',
    'state',
    'charge_Ah',
    'energy_Wh',
    'load_on_s',
    'bridged_Ah',
    'frames_accepted',
    'frames_rejected',
    'frames_lost',
    'rows_written',
    'sample_file',
    'cutoff_V',
    'calibration_id',
  ],
  properties: {
    host_s: num,
    wall_time: text,
    state: text,
    charge_Ah: num,
    energy_Wh: num,
    load_on_s: num,
    bridged_Ah: num,
    frames_accepted: count,
    frames_rejected: count,
    frames_lost: count,
    rows_written: count,
    sample_file: { type: ['string', 'null'] },
    cutoff_V: num,
    calibration_id: text,
  },
};

const validate = new Ajv({ allErrors: true, strict: true }).compile(SCHEMA);

export function writeCheckpoint(folder: string, c: Checkpoint): Promise<void> {
  return writeJsonAtomic(join(folder, CHECKPOINT_FILE), c);
}

/** checkpoint.json, or null when there is none. */
export async function readCheckpointFile(path: string): Promise<Checkpoint | null> {
  const text = await readOptional(path);
  return text === null
    ? null
    : parseChecked<Checkpoint>(
        text,
        path,
        validate,
        'Move the damaged file aside; the report does not need it (it only fills in counts the samples cannot give).',
      );
}
