/**
 * Reading a program file (YAML, docs/programs.md) and checking its shape. What the values may be
 * for a given chemistry is checked by planProgram, once the chemistry and cell count are known.
 */
import { Ajv, type SchemaObject } from 'ajv';
import { parseConfigYaml, readConfigText } from '../core/config-file.js';
import { schemaError } from '../core/schema-error.js';
import type { ProgramFile } from './program-types.js';

const positive = { type: 'number', exclusiveMinimum: 0 };

const charge = {
  type: 'object',
  additionalProperties: false,
  properties: {
    until: { enum: ['cc-cv', 'charger', 'time'] },
    V_per_cell: positive,
    current_C: positive,
    termination_C: positive,
    timeout_h: positive,
    hours: positive,
  },
};

const rest = {
  type: 'object',
  additionalProperties: false,
  properties: {
    minutes: { type: 'number', exclusiveMinimum: 0, maximum: 10080 },
    settle_mV_per_min: positive,
    max_minutes: { type: 'number', exclusiveMinimum: 0, maximum: 10080 },
  },
  dependencies: { settle_mV_per_min: ['max_minutes'], max_minutes: ['settle_mV_per_min'] },
  oneOf: [{ required: ['minutes'] }, { required: ['settle_mV_per_min', 'max_minutes'] }],
};

const discharge = {
  type: 'object',
  additionalProperties: false,
  properties: {
    current_A: positive,
    current_C: positive,
    power_W: positive,
    resistor: { const: true },
    cutoff_V_per_cell: positive,
    timeout_h: positive,
  },
  oneOf: [
    { required: ['current_A'] },
    { required: ['current_C'] },
    { required: ['power_W'] },
    { required: ['resistor'] },
  ],
};

const storage = {
  type: 'object',
  additionalProperties: false,
  properties: { current_C: positive },
};

/** One step: a map with exactly one key naming its kind. */
const step = (withRepeat: boolean): SchemaObject => ({
  type: 'object',
  minProperties: 1,
  maxProperties: 1,
  additionalProperties: false,
  properties: {
    charge,
    rest,
    discharge,
    storage,
    ...(withRepeat
      ? {
          repeat: {
            type: 'object',
            additionalProperties: false,
            required: ['times', 'steps'],
            properties: {
              times: { type: 'integer', minimum: 1, maximum: 100 },
              steps: { type: 'array', minItems: 1, maxItems: 50, items: step(false) },
            },
          },
        }
      : {}),
  },
});

const SCHEMA: SchemaObject = {
  type: 'object',
  additionalProperties: false,
  required: ['name', 'steps'],
  properties: {
    name: { type: 'string', minLength: 1, maxLength: 80 },
    rated_Ah: { type: 'number', exclusiveMinimum: 0, maximum: 1000 },
    steps: { type: 'array', minItems: 1, maxItems: 50, items: step(true) },
  },
};

const validate = new Ajv({
  strict: true,
  strictRequired: false,
  verbose: true,
}).compile<ProgramFile>(SCHEMA);

const HINTS = {
  what: 'program file',
  pattern: 'See docs/programs.md for the format.',
  fallback:
    'Each step is one of charge, rest, discharge, repeat or storage; compare with config/programs/capacity-check.yaml and docs/programs.md.',
};

/** Parses a program file's text; `where` names the file in messages. */
export function parseProgram(text: string, where: string): ProgramFile {
  const data = parseConfigYaml(
    text,
    'program file',
    where,
    'Fix the YAML syntax at the line shown (indentation, colons, the "-" before each step).',
  );
  if (!validate(data)) {
    // the alternatives of a oneOf each fail on their own; the oneOf says what to give instead
    const errors = validate.errors ?? [];
    const shown = errors.find((e) => !e.schemaPath.includes('/oneOf/')) ?? errors[0]!;
    throw schemaError(where, shown, HINTS);
  }
  return data;
}

/** Reads and parses a program file. */
export async function loadProgram(path: string): Promise<ProgramFile> {
  const text = await readConfigText(
    path,
    'program file',
    'Check the path; the shipped examples are in config/programs/.',
  );
  return parseProgram(text, path);
}
