/**
 * JSON schema of a schedule file (docs/schedules.md). Objects are closed so that a misspelt key
 * is an error, not a setting silently ignored. Durations are checked for their units in code,
 * where the message can show what was written.
 */
const duration = { type: ['string', 'number'] } as const;
const positive = { type: 'number', exclusiveMinimum: 0 } as const;

const pulse = {
  type: 'object',
  additionalProperties: false,
  required: ['on', 'every'],
  properties: { on: duration, every: duration },
} as const;

const step = {
  type: 'object',
  additionalProperties: false,
  properties: {
    load: duration,
    rest: duration,
    pulse,
  },
} as const;

export const SCHEDULE_SCHEMA = {
  type: 'object',
  additionalProperties: false,
  properties: {
    description: { type: 'string', minLength: 1, maxLength: 200 },
    load_ohm: positive,
    end_point_V_per_cell: positive,
    rest_first: duration,
    continuous: { type: 'boolean' },
    pulse,
    daily: duration,
    steps: { type: 'array', minItems: 1, maxItems: 100, items: step },
    repeat: { type: 'boolean' },
  },
} as const;

/** The file's content after the schema (the option string is parsed into the same shape). */
export interface ScheduleSpec {
  description?: string;
  load_ohm?: number;
  end_point_V_per_cell?: number;
  rest_first?: string | number;
  continuous?: boolean;
  pulse?: { on: string | number; every: string | number };
  daily?: string | number;
  steps?: Array<{
    load?: string | number;
    rest?: string | number;
    pulse?: { on: string | number; every: string | number };
  }>;
  repeat?: boolean;
}

/** What each key holds, for messages. */
export const SCHEDULE_KEYS: Record<string, string> = {
  description: 'free text',
  load_ohm: 'the load resistance the test calls for, in ohms',
  end_point_V_per_cell: 'the end-point voltage per cell, in volts',
  rest_first: 'a rest before the first load, e.g. "30 min"',
  continuous: 'true for a load that stays on to the end point',
  pulse: 'on and every, e.g. { on: 15 s, every: 1 min }',
  daily: 'load hours per day, e.g. "4 h"',
  steps: 'a list of { load: <duration> } and { rest: <duration> }',
  repeat: 'true to repeat the steps until the end point',
};
