import { CELL_ID_PATTERN as REGISTRY_CELL_ID } from '../registry/run-record.js';

/**
 * JSON schema of a station file (docs/station.md). Every object is closed, so a misspelt key is
 * an error rather than a silently ignored setting.
 */
const text = (max: number) => ({ type: 'string', minLength: 1, maxLength: max }) as const;

export const RIG_NAME_PATTERN = '^[A-Za-z][A-Za-z0-9_-]{0,31}$';
export const CHANNEL_KEY_PATTERN = '^(1[0-5]|[0-9])$';
/** A cell id as the registry files it: what is written on the cell, in letters, digits and . _ : / -. */
export const CELL_ID_PATTERN = REGISTRY_CELL_ID.source;

const channel = {
  type: 'object',
  additionalProperties: false,
  required: ['chemistry'],
  properties: {
    chemistry: { type: 'string', pattern: '^[a-z0-9-]{1,32}$' },
    cells: { type: 'integer', minimum: 1, maximum: 64 },
    /** End-of-discharge volts per cell; never below the chemistry's floor (checked at start). */
    cutoff_V_per_cell: { type: 'number', exclusiveMinimum: 0, maximum: 20 },
    label: text(60),
    cell_id: { type: 'string', pattern: CELL_ID_PATTERN },
    calibration: text(4096),
    schedule: text(4096),
  },
} as const;

const rig = {
  type: 'object',
  additionalProperties: false,
  required: ['channels'],
  oneOf: [{ required: ['port'] }, { required: ['sim'] }],
  properties: {
    port: text(4096),
    /** A simulated rig: a rig with several channels, or a one-channel scenario, of the scenario file. */
    sim: { type: 'string', pattern: '^[a-z0-9][a-z0-9-]{0,31}$' },
    profile: text(4096),
    baud: { type: 'integer', minimum: 300, maximum: 4000000 },
    link_timeout_s: { type: 'number', exclusiveMinimum: 0, maximum: 86400 },
    channels: {
      type: 'object',
      minProperties: 1,
      propertyNames: { pattern: CHANNEL_KEY_PATTERN },
      additionalProperties: { oneOf: [channel, { const: 'empty' }] },
    },
  },
} as const;

export const STATION_FILE_SCHEMA = {
  type: 'object',
  additionalProperties: false,
  required: ['rigs'],
  properties: {
    runs: text(4096),
    listen: { type: 'string', pattern: '^(off|\\S+:\\d{1,5})$' },
    rigs: {
      type: 'object',
      minProperties: 1,
      propertyNames: { pattern: RIG_NAME_PATTERN },
      additionalProperties: rig,
    },
  },
} as const;
