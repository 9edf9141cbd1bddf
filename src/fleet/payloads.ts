import { Ajv, type ErrorObject, type ValidateFunction } from 'ajv';
import { CELL_ID_PATTERN } from '../registry/run-record.js';
import type { LiveRunInfo, LiveSample } from '../live/live-types.js';
import { runInfoFields, SAMPLE_FIELDS } from '../live/message-schemas.js';
import { MAX_CHANNEL, STATION_ID_PATTERN, type ChannelKind } from './topics.js';

/**
 * Payloads of the fleet topics, version 1: plain JSON with the unit in every key that has one,
 * and the station id and channel in every payload as well as in its topic. The schemas below
 * are the contract (printed in docs/fleet.md); the station and the fleet view both validate what
 * they receive with them.
 */
export const FLEET_VERSION = 1;

export interface StationStatus {
  v: typeof FLEET_VERSION;
  station: string;
  online: boolean;
  /** When this status was made, ISO 8601. */
  wall: string;
  /** Why the station went offline: `stopped`, or `connection lost` from the last will. */
  reason?: string;
  host?: string;
  version?: string;
  channels?: number[];
  /** Broker commands refused since the daemon started (malformed, wrong token, refused by the run). */
  commands_refused?: number;
}

/** The run a channel is on; `run_id` is the run folder's name, unique per station. */
export interface FleetRunInfo extends LiveRunInfo {
  run_id: string;
}

export interface LastAlarm {
  host_s: number;
  kind: string;
  detail: string;
}

export interface ChannelStatus {
  v: typeof FLEET_VERSION;
  station: string;
  channel: number;
  wall: string;
  run: FleetRunInfo | null;
  state: string;
  ended: boolean;
  load_on: boolean | null;
  host_s: number | null;
  voltage_V: number | null;
  current_A: number | null;
  temperature_C: number | null;
  charge_Ah: number | null;
  energy_Wh: number | null;
  cutoff_V: number | null;
  time_to_cutoff_s: number | null;
  last_alarm: LastAlarm | null;
}

export interface FleetSample extends LiveSample {
  v: typeof FLEET_VERSION;
  station: string;
  channel: number;
  /** When the station's live feed had the sample, Unix milliseconds of the station's clock. */
  made_ms: number;
  time_to_cutoff_s: number | null;
}

interface ChannelEvent {
  v: typeof FLEET_VERSION;
  station: string;
  channel: number;
  wall: string;
  host_s: number;
}
export interface FleetState extends ChannelEvent {
  from: string;
  to: string;
  why: string;
}
export interface FleetAlarm extends ChannelEvent {
  kind: string;
  detail: string;
}
export interface FleetMark extends ChannelEvent {
  note: string;
}

export interface FleetResult {
  v: typeof FLEET_VERSION;
  station: string;
  channel: number;
  run_id: string;
  wall: string;
  /** The run's result.json as the station wrote it. */
  result: Record<string, unknown>;
}

export type FleetCommand = {
  v: typeof FLEET_VERSION;
  station: string;
  channel: number;
  token: string;
  id?: string;
} & (
  | { type: 'stop' }
  /** `confirm`: the sender confirmed a cutoff at or above the present voltage (added later). */
  | { type: 'set-cutoff'; cutoff_V: number; confirm?: boolean }
  | { type: 'mark'; note: string }
  /** A station's channel whose run has ended takes its next run (a fresh cell). */
  | { type: 'start'; cell_id?: string }
);

export type ReplyCode = 'malformed' | 'unauthorized' | 'refused';

export interface FleetReply {
  v: typeof FLEET_VERSION;
  station: string;
  channel: number;
  id: string | null;
  request: FleetCommand['type'] | null;
  ok: boolean;
  code?: ReplyCode;
  error?: string;
}

export interface PayloadByKind {
  status: ChannelStatus;
  sample: FleetSample;
  state: FleetState;
  alarm: FleetAlarm;
  mark: FleetMark;
  result: FleetResult;
  command: FleetCommand;
  reply: FleetReply;
}

const num = { type: 'number' } as const;
const numOrNull = { type: ['number', 'null'] } as const;
const str = { type: 'string', maxLength: 1000 } as const;
const wall = { type: 'string', maxLength: 40 } as const;
const station = { type: 'string', pattern: STATION_ID_PATTERN } as const;
const channel = { type: 'integer', minimum: 0, maximum: MAX_CHANNEL } as const;
const id = { type: 'string', maxLength: 64 } as const;

function closed(properties: Record<string, unknown>, optional: string[] = []) {
  return {
    type: 'object',
    additionalProperties: false,
    required: Object.keys(properties).filter((k) => !optional.includes(k)),
    properties,
  };
}

const head = { v: { const: FLEET_VERSION }, station, channel } as const;
const eventHead = { ...head, wall, host_s: num } as const;

const runInfo = closed({ run_id: str, ...runInfoFields(str, wall) });

const commandHead = { ...head, token: { type: 'string', minLength: 1, maxLength: 256 }, id };

/** Every payload's JSON schema, by what it is. */
export const FLEET_SCHEMAS = {
  station: closed(
    {
      v: { const: FLEET_VERSION },
      station,
      online: { type: 'boolean' },
      wall,
      reason: str,
      host: str,
      version: str,
      channels: { type: 'array', maxItems: 256, items: channel },
      commands_refused: { type: 'integer', minimum: 0 },
    },
    ['reason', 'host', 'version', 'channels', 'commands_refused'],
  ),
  status: closed({
    ...head,
    wall,
    run: { oneOf: [{ type: 'null' }, runInfo] },
    state: str,
    ended: { type: 'boolean' },
    load_on: { type: ['boolean', 'null'] },
    host_s: numOrNull,
    voltage_V: numOrNull,
    current_A: numOrNull,
    temperature_C: numOrNull,
    charge_Ah: numOrNull,
    energy_Wh: numOrNull,
    cutoff_V: numOrNull,
    time_to_cutoff_s: numOrNull,
    last_alarm: {
      oneOf: [{ type: 'null' }, closed({ host_s: num, kind: str, detail: str })],
    },
  }),
  // The live feed's sample fields, with the state's text bounded as every fleet text is.
  sample: closed({
    ...head,
    made_ms: num,
    ...SAMPLE_FIELDS,
    state: str,
    time_to_cutoff_s: numOrNull,
  }),
  state: closed({ ...eventHead, from: str, to: str, why: str }),
  alarm: closed({ ...eventHead, kind: str, detail: str }),
  mark: closed({ ...eventHead, note: str }),
  result: closed({ ...head, run_id: str, wall, result: { type: 'object' } }),
  command: {
    oneOf: [
      closed({ ...commandHead, type: { const: 'stop' } }, ['id']),
      closed(
        {
          ...commandHead,
          type: { const: 'set-cutoff' },
          cutoff_V: num,
          confirm: { type: 'boolean' },
        },
        ['id', 'confirm'],
      ),
      closed(
        {
          ...commandHead,
          type: { const: 'mark' },
          note: { type: 'string', minLength: 1, maxLength: 500 },
        },
        ['id'],
      ),
      closed(
        {
          ...commandHead,
          type: { const: 'start' },
          cell_id: { type: 'string', pattern: CELL_ID_PATTERN.source },
        },
        ['id', 'cell_id'],
      ),
    ],
  },
  reply: closed(
    {
      ...head,
      id: { oneOf: [{ type: 'null' }, id] },
      request: { enum: ['stop', 'set-cutoff', 'mark', 'start', null] },
      ok: { type: 'boolean' },
      code: { enum: ['malformed', 'unauthorized', 'refused'] },
      error: str,
    },
    ['code', 'error'],
  ),
} as const;

const ajv = new Ajv({ strict: true, allowUnionTypes: true });
const validators = Object.fromEntries(
  Object.entries(FLEET_SCHEMAS).map(([k, s]) => [k, ajv.compile(s)]),
) as Record<keyof typeof FLEET_SCHEMAS, ValidateFunction>;

/** The largest payload either side reads; anything longer is refused unparsed. */
export const MAX_PAYLOAD_BYTES = 64 * 1024;

export type Parsed<T> = { ok: true; value: T } | { ok: false; error: string };

function describe(errors: ErrorObject[] | null | undefined): string {
  const e = errors?.[0];
  return e ? `${e.instancePath || '(payload)'} ${e.message ?? 'is invalid'}` : 'is invalid';
}

/** Parses and validates one payload as what its topic says it is. */
export function parsePayload<K extends ChannelKind | 'station'>(
  kind: K,
  bytes: Buffer,
): Parsed<K extends ChannelKind ? PayloadByKind[K] : StationStatus> {
  if (bytes.length > MAX_PAYLOAD_BYTES)
    return { ok: false, error: `longer than ${MAX_PAYLOAD_BYTES} bytes` };
  let x: unknown;
  try {
    x = JSON.parse(bytes.toString('utf8'));
  } catch {
    return { ok: false, error: 'not JSON' };
  }
  const v = validators[kind];
  return v(x)
    ? { ok: true, value: x as K extends ChannelKind ? PayloadByKind[K] : StationStatus }
    : { ok: false, error: `${kind}: ${describe(v.errors)}` };
}
