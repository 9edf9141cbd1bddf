import { Ajv, type ErrorObject, type ValidateFunction } from 'ajv';
import { CELL_ID_PATTERN } from '../registry/run-record.js';
import { LIVE_VERSION, type ClientMessage, type ServerMessage } from './live-types.js';

/**
 * JSON schemas of every live-feed message (docs/live-feed.md). Objects are closed so a
 * misspelt field is an error; the daemon validates what viewers send, and viewers (and the
 * tests) can validate what the daemon sends.
 */
const num = { type: 'number' } as const;
const numOrNull = { type: ['number', 'null'] } as const;
const str = { type: 'string' } as const;
const version = { const: LIVE_VERSION } as const;
const id = { type: 'string', maxLength: 64 } as const;

/** A station channel's key, `<rig>/<n>`, or a one-channel run's channel number. */
const channel = { type: 'string', minLength: 1, maxLength: 64 } as const;

/** Every message may say which channel it is about. */
function message(
  type: string,
  properties: Record<string, unknown>,
  required: string[],
): Record<string, unknown> {
  return {
    type: 'object',
    additionalProperties: false,
    required: ['type', 'v', ...required],
    properties: { type: { const: type }, v: version, channel, ...properties },
  };
}

/** A sample's measured fields, shared with the fleet's sample payload. */
export const SAMPLE_FIELDS = {
  host_s: num,
  voltage_V: num,
  current_A: num,
  temperature_C: numOrNull,
  charge_Ah: num,
  energy_Wh: num,
  state: str,
  load_on: { type: 'boolean' },
} as const;
const sampleFields = SAMPLE_FIELDS;
const sampleRequired = Object.keys(sampleFields);

/** A run's details; the fleet's payload takes the same fields with its own bounded texts. */
export function runInfoFields<T, W>(text: T, wall: W) {
  return {
    label: text,
    run_folder: text,
    chemistry: text,
    cells: { type: 'integer', minimum: 1 },
    cutoff_V: num,
    floor_V: num,
    calibration_id: text,
    started_wall: wall,
    source: text,
    max_temperature_C: num,
  } as const;
}
const runInfoProperties = runInfoFields(str, str);

const runInfo = {
  type: 'object',
  additionalProperties: false,
  required: Object.keys(runInfoProperties),
  properties: runInfoProperties,
} as const;

const feedStatus = {
  type: 'object',
  additionalProperties: false,
  required: ['sample', 'state', 'cutoff_V', 'time_to_cutoff_s', 'slope_V_per_s', 'ended'],
  properties: {
    sample: {
      oneOf: [
        { type: 'null' },
        {
          type: 'object',
          additionalProperties: false,
          required: sampleRequired,
          properties: sampleFields,
        },
      ],
    },
    state: str,
    cutoff_V: numOrNull,
    time_to_cutoff_s: numOrNull,
    slope_V_per_s: numOrNull,
    ended: { type: 'boolean' },
  },
} as const;

const stateFields = { host_s: num, from: str, to: str, why: str } as const;
const alarmFields = { host_s: num, kind: str, detail: str } as const;
const markFields = { host_s: num, note: str } as const;
const resultObject = { type: 'object' } as const;

export const SERVER_MESSAGE_SCHEMAS = {
  hello: message(
    'hello',
    {
      run: { oneOf: [{ type: 'null' }, runInfo] },
      status: feedStatus,
      history: {
        type: 'object',
        additionalProperties: false,
        required: ['fields', 'stride', 'points'],
        properties: {
          fields: {
            const: ['host_s', 'voltage_V', 'current_A', 'temperature_C', 'charge_Ah', 'energy_Wh'],
          },
          stride: { type: 'integer', minimum: 1 },
          points: {
            type: 'array',
            items: {
              type: 'array',
              minItems: 6,
              maxItems: 6,
              items: [num, num, num, numOrNull, num, num],
            },
          },
        },
      },
      alarms: {
        type: 'array',
        items: {
          type: 'object',
          additionalProperties: false,
          required: Object.keys(alarmFields),
          properties: alarmFields,
        },
      },
      events: {
        type: 'array',
        items: {
          oneOf: [
            {
              type: 'object',
              additionalProperties: false,
              required: ['kind', ...Object.keys(stateFields)],
              properties: { kind: { const: 'state' }, ...stateFields },
            },
            {
              type: 'object',
              additionalProperties: false,
              required: ['kind', ...Object.keys(markFields)],
              properties: { kind: { const: 'mark' }, ...markFields },
            },
          ],
        },
      },
      result: { oneOf: [{ type: 'null' }, resultObject] },
    },
    ['run', 'status', 'history', 'alarms', 'events', 'result'],
  ),
  sample: message('sample', { ...sampleFields, time_to_cutoff_s: numOrNull }, [
    ...sampleRequired,
    'time_to_cutoff_s',
  ]),
  state: message('state', stateFields, Object.keys(stateFields)),
  alarm: message('alarm', alarmFields, Object.keys(alarmFields)),
  mark: message('mark', markFields, Object.keys(markFields)),
  result: message('result', { result: resultObject }, ['result']),
  cutoff: message('cutoff', { cutoff_V: num, by: str, host_s: num }, ['cutoff_V']),
  station: message(
    'station',
    {
      channels: {
        type: 'array',
        items: {
          type: 'object',
          additionalProperties: false,
          required: ['channel', 'rig', 'ch', 'cell_id', 'run', 'status', 'alarm', 'result'],
          properties: {
            channel,
            rig: str,
            ch: { type: 'integer', minimum: 0, maximum: 15 },
            cell_id: { oneOf: [{ type: 'null' }, str] },
            run: { oneOf: [{ type: 'null' }, runInfo] },
            status: feedStatus,
            alarm: {
              oneOf: [
                { type: 'null' },
                {
                  type: 'object',
                  additionalProperties: false,
                  required: Object.keys(alarmFields),
                  properties: alarmFields,
                },
              ],
            },
            result: { oneOf: [{ type: 'null' }, resultObject] },
          },
        },
      },
    },
    ['channels'],
  ),
  ack: message(
    'ack',
    {
      id: { oneOf: [{ type: 'null' }, id] },
      request: { enum: ['stop', 'set-cutoff', 'mark', 'start'] },
    },
    ['id', 'request'],
  ),
  error: message(
    'error',
    {
      id: { oneOf: [{ type: 'null' }, id] },
      code: { enum: ['malformed', 'unauthorized', 'refused'] },
      error: str,
    },
    ['id', 'code', 'error'],
  ),
} as const;

/** Control tokens are 64 hex digits; the bound only keeps junk short. */
const token = { type: 'string', minLength: 1, maxLength: 256 } as const;

/** One schema per control message a viewer may send, by type. */
export const CLIENT_MESSAGE_SCHEMAS = {
  stop: message('stop', { token, id }, ['token']),
  'set-cutoff': message('set-cutoff', { token, id, cutoff_V: num, confirm: { type: 'boolean' } }, [
    'token',
    'cutoff_V',
  ]),
  mark: message('mark', { token, id, note: { type: 'string', minLength: 1, maxLength: 500 } }, [
    'token',
    'note',
  ]),
  /** A station's channel only: the next run, on a fresh cell, optionally named. */
  start: message(
    'start',
    {
      token,
      id,
      // As the registry files it: letters, digits and . _ : / -, starting with a letter or digit.
      cell_id: { type: 'string', pattern: CELL_ID_PATTERN.source },
    },
    ['token'],
  ),
} as const;

const ajv = new Ajv({ allErrors: false, strict: true, strictTuples: false, allowUnionTypes: true });

function compileAll<K extends string>(
  schemas: Record<K, Record<string, unknown>>,
): Record<K, ValidateFunction> {
  return Object.fromEntries(
    Object.entries(schemas).map(([k, s]) => [k, ajv.compile(s as Record<string, unknown>)]),
  ) as Record<K, ValidateFunction>;
}

const clientValidators = compileAll(CLIENT_MESSAGE_SCHEMAS);
const serverValidators = compileAll(SERVER_MESSAGE_SCHEMAS);

function describe(errors: ErrorObject[] | null | undefined): string {
  const e = errors?.[0];
  return e ? `${e.instancePath || '(message)'} ${e.message ?? 'is invalid'}` : 'is invalid';
}

export type Checked<T> = { ok: true; value: T } | { ok: false; error: string };

function check<T>(
  validators: Record<string, ValidateFunction>,
  x: unknown,
  unknown: string,
): Checked<T> {
  if (typeof x !== 'object' || x === null || Array.isArray(x))
    return { ok: false, error: 'a message must be a JSON object' };
  const type = (x as { type?: unknown }).type;
  const v =
    typeof type === 'string' && Object.hasOwn(validators, type) ? validators[type] : undefined;
  if (!v) return { ok: false, error: `unknown message type ${JSON.stringify(type)}; ${unknown}` };
  return v(x)
    ? { ok: true, value: x as T }
    : { ok: false, error: `${type}: ${describe(v.errors)}` };
}

/** Validates a control message from a viewer (already JSON-parsed). */
export function checkClientMessage(x: unknown): Checked<ClientMessage> {
  return check<ClientMessage>(
    clientValidators,
    x,
    'viewers may send stop, set-cutoff, mark, or start (a station channel)',
  );
}

/** Validates a message from the daemon, by its type. */
export function checkServerMessage(x: unknown): Checked<ServerMessage> {
  return check<ServerMessage>(
    serverValidators,
    x,
    `the daemon sends ${Object.keys(serverValidators).join(', ')}`,
  );
}
