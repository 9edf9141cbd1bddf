/**
 * Reading and validating rig profiles (config/rigs/*.yaml). Every problem is reported with the
 * file, the key path, what was found, and what to set instead.
 */
import { Ajv, type ErrorObject, type SchemaObject } from 'ajv';
import { parseConfigYaml, readConfigText } from '../core/config-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { packagePath } from '../core/paths.js';
import { checkRigPlausible } from './rig-plausible.js';
import type { RigProfile } from './rig-profile-types.js';

/** The rig profile shipped with the package, used when no --rig is given. */
export const DEFAULT_RIG_PATH = packagePath('config/rigs/bench-20mohm.yaml');

const positive = { type: 'number', exclusiveMinimum: 0 };

const SCHEMA: SchemaObject = {
  type: 'object',
  additionalProperties: false,
  required: ['adc', 'voltage', 'current', 'temperature', 'frame'],
  properties: {
    name: { type: 'string' },
    adc: {
      type: 'object',
      additionalProperties: false,
      required: ['bits', 'vref_V'],
      properties: { bits: { type: 'integer', minimum: 8, maximum: 24 }, vref_V: positive },
    },
    voltage: {
      type: 'object',
      additionalProperties: false,
      required: ['divider_top_ohm', 'divider_bottom_ohm'],
      // A top of 0 Ω (no divider) is a real wiring; the bottom divides, so it must be > 0.
      properties: { divider_top_ohm: { type: 'number', minimum: 0 }, divider_bottom_ohm: positive },
    },
    current: {
      type: 'object',
      additionalProperties: false,
      required: ['shunt_ohm'],
      properties: {
        shunt_ohm: positive,
        amplifier_gain: positive,
        rin_ohm: positive,
        rf_ohm: positive,
        input_offset_V: { type: 'number' },
        connection_ohm: { type: 'number', minimum: 0 },
      },
      oneOf: [
        {
          required: ['amplifier_gain'],
          not: { anyOf: [{ required: ['rin_ohm'] }, { required: ['rf_ohm'] }] },
        },
        { required: ['rin_ohm', 'rf_ohm'], not: { required: ['amplifier_gain'] } },
      ],
    },
    temperature: {
      type: 'object',
      additionalProperties: false,
      required: ['ntc_r25_ohm', 'ntc_beta_K', 'fixed_ohm', 'ntc_position'],
      properties: {
        ntc_r25_ohm: positive,
        ntc_beta_K: positive,
        fixed_ohm: positive,
        ntc_position: { enum: ['low', 'high'] },
        steinhart_hart: {
          type: 'object',
          additionalProperties: false,
          required: ['a', 'b', 'c'],
          properties: { a: { type: 'number' }, b: positive, c: { type: 'number' } },
        },
      },
    },
    frame: {
      type: 'object',
      additionalProperties: false,
      required: ['baud'],
      properties: { baud: { type: 'integer', exclusiveMinimum: 0 } },
    },
    limits: {
      type: 'object',
      additionalProperties: false,
      properties: { max_current_A: positive },
    },
    charger: {
      type: 'object',
      additionalProperties: false,
      required: ['monitor_A_per_V'],
      properties: { monitor_A_per_V: positive },
    },
  },
};

/** What each key holds, for the "set it to …" part of a message. */
const MEANING: Record<string, string> = {
  name: 'free text naming the rig',
  adc: 'a mapping with bits and vref_V',
  'adc.bits': "the ADC's resolution in bits",
  'adc.vref_V': "the ADC's reference voltage in volts",
  voltage: 'a mapping with divider_top_ohm and divider_bottom_ohm',
  'voltage.divider_top_ohm':
    'the divider resistor from the cell to the ADC input, in ohms (0 without a divider)',
  'voltage.divider_bottom_ohm': 'the divider resistor from the ADC input to ground, in ohms',
  current: 'a mapping with shunt_ohm and amplifier_gain (or rin_ohm and rf_ohm)',
  'current.shunt_ohm': "the shunt's value in ohms",
  'current.amplifier_gain': "the current amplifier's voltage gain",
  'current.rin_ohm': "the inverting stage's input resistor in ohms",
  'current.rf_ohm': "the inverting stage's feedback resistor in ohms",
  'current.input_offset_V': "the op-amp's input offset voltage in volts, from its datasheet",
  'current.connection_ohm': 'the solder and trace resistance in series with the shunt, in ohms',
  temperature: 'a mapping with ntc_r25_ohm, ntc_beta_K, fixed_ohm and ntc_position',
  'temperature.ntc_r25_ohm': "the NTC's resistance at 25 °C in ohms",
  'temperature.ntc_beta_K': "the NTC's Beta value in kelvin, from its datasheet",
  'temperature.fixed_ohm': 'the fixed resistor of the thermistor divider in ohms',
  'temperature.ntc_position':
    'low (NTC between the ADC input and ground) or high (NTC between the reference and the input)',
  'temperature.steinhart_hart': 'a mapping with the coefficients a, b and c',
  'temperature.steinhart_hart.a': 'the Steinhart–Hart coefficient a (1/K)',
  'temperature.steinhart_hart.b': 'the Steinhart–Hart coefficient b (1/K)',
  'temperature.steinhart_hart.c': 'the Steinhart–Hart coefficient c (1/K)',
  frame: 'a mapping with baud',
  'frame.baud': 'the serial speed in baud, e.g. 115200',
  limits: 'a mapping with max_current_A',
  'limits.max_current_A': 'the highest current the rig may carry, in amps',
  charger: 'a mapping with monitor_A_per_V',
  'charger.monitor_A_per_V':
    "the charger's current per volt of its monitor output, in amps per volt (protocol 1.1 rigs)",
};

const validate = new Ajv({ allErrors: true, strict: true, strictRequired: false }).compile(SCHEMA);

/** Reads, parses and validates a rig profile file. */
export async function loadRigProfile(path: string): Promise<RigProfile> {
  const text = await readConfigText(
    path,
    'rig profile',
    'Check the path given with --rig; the profiles shipped are in config/rigs/.',
  );
  return parseRigProfile(text, path);
}

/** Parses and validates rig profile YAML; `where` names the source in messages. */
export function parseRigProfile(text: string, where: string): RigProfile {
  const data = parseConfigYaml(
    text,
    'rig profile',
    where,
    'Fix the YAML syntax at the line shown (indentation, a missing colon or an unclosed brace).',
  );
  if (!validate(data)) {
    const problems = describeErrors(validate.errors ?? [], data);
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      problems.map((p) => p.what).join('; '),
      where,
      problems.map((p) => p.fix).join(' '),
    );
  }
  checkRigPlausible(data as RigProfile, where);
  return data as RigProfile;
}

interface Problem {
  what: string;
  fix: string;
}

function describeErrors(errors: readonly ErrorObject[], data: unknown): Problem[] {
  const seen = new Set<string>();
  const out: Problem[] = [];
  for (const e of errors) {
    // The branches of the amplifier rule fail in ways that only confuse; the rule's own
    // error is reported instead.
    if (e.schemaPath.includes('/oneOf/')) continue;
    const p = describe(e, data);
    if (!seen.has(p.what)) {
      seen.add(p.what);
      out.push(p);
    }
  }
  return out;
}

function describe(e: ErrorObject, data: unknown): Problem {
  const segments = e.instancePath.split('/').slice(1);
  const path = segments.join('.');
  const value = valueAt(data, segments);
  const got = `got ${show(value)}`;
  const setIt = `Set ${path} to ${MEANING[path] ?? 'a valid value'}.`;
  switch (e.keyword) {
    case 'additionalProperties': {
      const key = String((e.params as { additionalProperty: string }).additionalProperty);
      const full = path ? `${path}.${key}` : key;
      const known = Object.keys(schemaAt(segments)?.['properties'] ?? {}).join(', ');
      return {
        what: `${full} is not a known key`,
        fix: `Remove ${full} or correct its spelling (known keys here: ${known}).`,
      };
    }
    case 'required': {
      const key = String((e.params as { missingProperty: string }).missingProperty);
      const full = path ? `${path}.${key}` : key;
      return { what: `${full} is missing`, fix: `Add ${full}: ${MEANING[full] ?? 'a value'}.` };
    }
    case 'oneOf':
      return {
        what: `${path} must give either amplifier_gain or both rin_ohm and rf_ohm (exactly one of the two)`,
        fix: 'Use amplifier_gain for a non-inverting stage, or rin_ohm and rf_ohm for an inverting stage, and remove the other.',
      };
    case 'enum': {
      const allowed = (e.params as { allowedValues: unknown[] }).allowedValues
        .map((v) => String(v))
        .join(' or ');
      return { what: `${path} must be ${allowed}, ${got}`, fix: setIt };
    }
    case 'type': {
      if (path === '') {
        return {
          what: `the rig profile must be a YAML mapping, ${value === null ? 'got nothing (the file is empty or only comments)' : got}`,
          fix: 'Start from config/rigs/bench-20mohm.yaml and edit its values.',
        };
      }
      const type = String((e.params as { type: string }).type);
      const noun =
        type === 'integer' ? 'a whole number' : type === 'object' ? 'a mapping' : `a ${type}`;
      return { what: `${path} must be ${noun}, ${got}`, fix: setIt };
    }
    case 'minimum':
    case 'maximum': {
      const s = schemaAt(segments);
      const min = s?.['minimum'] as number | undefined;
      const max = s?.['maximum'] as number | undefined;
      const range =
        min !== undefined && max !== undefined
          ? `from ${min} to ${max}`
          : min !== undefined
            ? `≥ ${min}`
            : `≤ ${String(max)}`;
      return { what: `${path} must be ${range}, ${got}`, fix: setIt };
    }
    case 'exclusiveMinimum':
      return { what: `${path} must be a number > 0, ${got}`, fix: setIt };
    default:
      return { what: `${path} ${e.message ?? 'is invalid'}, ${got}`, fix: setIt };
  }
}

function valueAt(data: unknown, segments: readonly string[]): unknown {
  let v = data;
  for (const s of segments)
    v = v !== null && typeof v === 'object' ? (v as Record<string, unknown>)[s] : undefined;
  return v;
}

function schemaAt(segments: readonly string[]): SchemaObject | undefined {
  let s: SchemaObject | undefined = SCHEMA;
  for (const seg of segments)
    s = (s?.['properties'] as Record<string, SchemaObject> | undefined)?.[seg];
  return s;
}

function show(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (typeof value === 'number') return String(value);
  return JSON.stringify(value) ?? String(value);
}
