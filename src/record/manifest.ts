/**
 * manifest.json of a run folder (docs/run-folder.md): what was run, written once when the run
 * starts. Read back checked with a schema, and the copies it holds (rig profile, calibration,
 * chemistry profile) checked by their own validators, so a recompute never runs on a profile the
 * daemon itself would have refused.
 */
import { join } from 'node:path';
import { Ajv, type SchemaObject } from 'ajv';
import type { Calibration } from '../calibration/calibration.js';
import { parseCalibration } from '../calibration/calibration-file.js';
import { parseRigProfile } from '../chain/rig-profile-file.js';
import type { RigProfile } from '../chain/rig-profile-types.js';
import { parseChemistries } from '../chemistry/chemistry-file.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { CellvigilError, ErrorCodes, makeError } from '../core/errors.js';
import { writeJsonAtomic } from '../sinks/atomic-json.js';
import { schemaProblems } from './json-file.js';

import type { Plan } from '../program/program-types.js';

export const MANIFEST_FILE = 'manifest.json';

export interface RunManifest {
  format: 'cellvigil-run';
  format_version: 1;
  cellvigil_version: string;
  node_version: string;
  label: string;
  /** What is written on the cell, as the user gave it; absent in runs older than cell ids. */
  cell_id?: string | null;
  started_wall: string;
  source: { kind: 'sim' | 'serial'; description: string; scenario?: string; speed?: number };
  channel: number;
  rig: { file: string | null; profile: RigProfile };
  calibration: { file: string | null; id: string; content: Calibration | null };
  chemistry: { id: string; profile: ChemistryProfile };
  cells: number;
  cutoff_V: number;
  cutoff_per_cell_V: number;
  cutoff_source: string;
  floor_V: number;
  limits: { max_temperature_C: number; max_current_A: number };
  samples: { prefix: string; rotate_bytes: number };
  /** The discharge schedule as given, when the run had one. */
  schedule?: { kind: 'file' | 'option'; text: string; where: string; description: string };
  /** A program run's program: its name, the file as read, and its plan as resolved (docs/programs.md). */
  program?: { name: string; file: string; text: string; plan: Plan };
}

const positive = { type: 'number', exclusiveMinimum: 0 };
const text = { type: 'string' };

// Open at the top level (later versions may add keys); the nested copies are checked below.
const SCHEMA: SchemaObject = {
  type: 'object',
  required: [
    'format',
    'format_version',
    'cellvigil_version',
    'label',
    'started_wall',
    'source',
    'channel',
    'rig',
    'calibration',
    'chemistry',
    'cells',
    'cutoff_V',
    'cutoff_per_cell_V',
    'floor_V',
    'limits',
    'samples',
  ],
  properties: {
    format: { const: 'cellvigil-run' },
    format_version: { const: 1 },
    cellvigil_version: text,
    node_version: text,
    label: text,
    started_wall: { type: 'string', minLength: 1 },
    source: {
      type: 'object',
      required: ['kind', 'description'],
      properties: {
        kind: { enum: ['sim', 'serial'] },
        description: text,
        scenario: text,
        speed: positive,
      },
    },
    channel: { type: 'integer', minimum: 0, maximum: 15 },
    rig: {
      type: 'object',
      required: ['profile'],
      properties: { file: { type: ['string', 'null'] }, profile: { type: 'object' } },
    },
    calibration: {
      type: 'object',
      required: ['id', 'content'],
      properties: {
        file: { type: ['string', 'null'] },
        id: { type: 'string', pattern: '^(none|[0-9a-f]{16})$' },
        content: { type: ['object', 'null'] },
      },
    },
    chemistry: {
      type: 'object',
      required: ['id', 'profile'],
      properties: { id: { type: 'string', minLength: 1 }, profile: { type: 'object' } },
    },
    cells: { type: 'integer', minimum: 1, maximum: 64 },
    cutoff_V: positive,
    cutoff_per_cell_V: positive,
    cutoff_source: text,
    floor_V: positive,
    limits: {
      type: 'object',
      required: ['max_temperature_C', 'max_current_A'],
      properties: { max_temperature_C: { type: 'number' }, max_current_A: positive },
    },
    samples: {
      type: 'object',
      required: ['prefix'],
      properties: {
        prefix: { type: 'string', pattern: '^[A-Za-z0-9._-]+$' },
        rotate_bytes: { type: 'integer', minimum: 1 },
      },
    },
    schedule: {
      type: 'object',
      required: ['kind', 'text', 'description'],
      properties: { kind: { enum: ['file', 'option'] }, text, where: text, description: text },
    },
    program: {
      type: 'object',
      required: ['name', 'file', 'text', 'plan'],
      properties: {
        name: text,
        file: text,
        text,
        plan: { type: 'object', required: ['name', 'cells', 'steps'] },
      },
    },
  },
};

const validate = new Ajv({ allErrors: true, strict: true, strictRequired: false }).compile(SCHEMA);

const FIX =
  'The manifest is written by `cellvigil run` at the start of a run; restore it from a backup of the run folder, or correct the key named.';

/** Parses and checks manifest.json; `where` names the file in messages. */
export function parseManifest(textIn: string, where: string): RunManifest {
  let data: unknown;
  try {
    data = JSON.parse(textIn);
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_DATA,
      `the manifest is not valid JSON: ${(e as Error).message}`,
      where,
      FIX,
    );
  }
  if (!validate(data))
    throw makeError(
      ErrorCodes.RUN_DATA,
      `the manifest is malformed: ${schemaProblems(validate).join('; ')}`,
      where,
      FIX,
    );
  const m = data as RunManifest;
  const nested = <T>(key: string, check: () => T): T => {
    try {
      return check();
    } catch (e) {
      const msg = e instanceof CellvigilError ? e.message : String(e);
      throw makeError(
        ErrorCodes.RUN_DATA,
        `the manifest's ${key} is not valid: ${msg}`,
        where,
        FIX,
      );
    }
  };
  nested('rig.profile', () =>
    parseRigProfile(JSON.stringify(m.rig.profile), `${where}: rig.profile`),
  );
  if (m.calibration.content !== null) {
    const cal = nested('calibration.content', () =>
      parseCalibration(JSON.stringify(m.calibration.content), `${where}: calibration.content`),
    );
    if (cal.id !== m.calibration.id) {
      throw makeError(
        ErrorCodes.RUN_DATA,
        `calibration.id ${m.calibration.id} differs from the id of calibration.content (${cal.id})`,
        where,
        FIX,
      );
    }
  } else if (m.calibration.id !== 'none') {
    throw makeError(
      ErrorCodes.RUN_DATA,
      `calibration.id is ${m.calibration.id} but calibration.content is null`,
      where,
      FIX,
    );
  }
  const { id, ...profile } = m.chemistry.profile;
  if (id !== undefined && id !== m.chemistry.id) {
    throw makeError(
      ErrorCodes.RUN_DATA,
      `chemistry.id ${m.chemistry.id} differs from chemistry.profile.id ${id}`,
      where,
      FIX,
    );
  }
  const [chemistry] = nested('chemistry.profile', () =>
    parseChemistries(JSON.stringify({ [m.chemistry.id]: profile }), `${where}: chemistry.profile`),
  );
  return { ...m, chemistry: { id: m.chemistry.id, profile: chemistry! } };
}

export function writeManifest(folder: string, m: RunManifest): Promise<void> {
  return writeJsonAtomic(join(folder, MANIFEST_FILE), m);
}
