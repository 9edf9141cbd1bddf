import { CHEMISTRY_IDS } from './cell-model.js';

/**
 * JSON schema of config/sim-scenarios.yaml. Every object is closed so a misspelt key is an
 * error rather than a silently ignored setting; defaults are filled in by the validator.
 */
const num = { type: 'number' } as const;
const nonNegative = { type: 'number', minimum: 0 } as const;
const positive = { type: 'number', exclusiveMinimum: 0 } as const;
const probability = { type: 'number', minimum: 0, maximum: 1 } as const;
const scenarioName = '^[a-z0-9][a-z0-9-]{0,31}$';
const token = { type: 'string', pattern: '^[A-Za-z0-9._-]{1,32}$' } as const;

const rigRequired = ['rig_id', 'firmware', 'clock_error', 'frame_period_ms'];
const rigProperties = {
  rig_id: token,
  firmware: token,
  clock_error: { type: 'number', exclusiveMinimum: -1, maximum: 1 },
  frame_period_ms: { type: 'number', minimum: 1, maximum: 60000 },
} as const;

const scenario = {
  type: 'object',
  additionalProperties: false,
  required: ['description', 'cell', 'thermal', 'load', 'front_end', 'rig', 'faults'],
  properties: {
    description: { type: 'string', minLength: 1 },
    cell: {
      type: 'object',
      additionalProperties: false,
      required: ['chemistry', 'cells', 'capacity_Ah', 'initial_soc'],
      properties: {
        chemistry: { type: 'string', enum: [...CHEMISTRY_IDS] },
        cells: { type: 'integer', minimum: 1, maximum: 64 },
        capacity_Ah: positive,
        initial_soc: probability,
        internal_ohm_per_cell: nonNegative,
        state_of_health: { type: 'number', exclusiveMinimum: 0, maximum: 1, default: 1 },
        polarization_ohm_per_cell: nonNegative,
        polarization_time_s: positive,
        leak_A: nonNegative,
      },
    },
    thermal: {
      type: 'object',
      additionalProperties: false,
      required: ['ambient_C', 'heat_capacity_J_per_K', 'conductance_W_per_K'],
      properties: {
        ambient_C: { type: 'number', minimum: -40, maximum: 80 },
        heat_capacity_J_per_K: positive,
        conductance_W_per_K: positive,
        load_heat_fraction: { ...probability, default: 0 },
        extra_heat_W: { ...nonNegative, default: 0 },
      },
    },
    load: {
      type: 'object',
      additionalProperties: false,
      required: ['load_ohm', 'mosfet_ohm'],
      properties: {
        load_ohm: positive,
        mosfet_ohm: nonNegative,
        constant_current: {
          type: 'object',
          additionalProperties: false,
          required: ['i_min_counts', 'i_max_counts', 'trim_error', 'ripple_A'],
          properties: {
            i_min_counts: { type: 'integer', minimum: 1, maximum: 16777215 },
            i_max_counts: { type: 'integer', minimum: 1, maximum: 16777215 },
            trim_error: { type: 'number', minimum: -0.1, maximum: 0.1 },
            ripple_A: nonNegative,
          },
        },
      },
    },
    charger: {
      type: 'object',
      additionalProperties: false,
      required: ['current_A', 'charge_V', 'termination_A'],
      properties: {
        current_A: positive,
        charge_V: positive,
        termination_A: nonNegative,
        heat_to_cell_W: nonNegative,
      },
    },
    front_end: {
      type: 'object',
      additionalProperties: false,
      required: ['current_gain_error', 'voltage_gain_error', 'noise_counts'],
      oneOf: [{ required: ['current_offset_A'] }, { required: ['current_offset_V'] }],
      properties: {
        current_offset_A: num,
        current_offset_V: num,
        current_gain_error: { type: 'number', minimum: 0, maximum: 1 },
        voltage_gain_error: { type: 'number', minimum: -0.5, maximum: 0.5 },
        noise_counts: nonNegative,
        thermistor: { type: 'string', enum: ['ok', 'open', 'short'], default: 'ok' },
        thermistor_fails_after_s: nonNegative,
      },
    },
    rig: {
      type: 'object',
      additionalProperties: false,
      required: rigRequired,
      properties: {
        ...rigProperties,
        channel: { type: 'integer', minimum: 0, maximum: 15, default: 0 },
      },
    },
    faults: {
      type: 'object',
      additionalProperties: false,
      required: ['drop_probability', 'garbage_probability', 'burst_frames', 'seed'],
      properties: {
        drop_probability: probability,
        garbage_probability: probability,
        burst_frames: { type: 'integer', minimum: 1, maximum: 1000 },
        seed: { type: 'integer', minimum: 0, maximum: 4294967295 },
      },
    },
  },
} as const;

/** A rig with several channels: the rig's own parts, and a cell scenario on each channel. */
const multiRig = {
  type: 'object',
  additionalProperties: false,
  required: ['description', 'rig', 'faults', 'channels'],
  properties: {
    description: { type: 'string', minLength: 1 },
    rig: {
      type: 'object',
      additionalProperties: false,
      required: rigRequired,
      properties: rigProperties,
    },
    faults: scenario.properties.faults,
    channels: {
      type: 'object',
      minProperties: 1,
      propertyNames: { pattern: '^(1[0-5]|[0-9])$' },
      additionalProperties: { type: 'string', pattern: scenarioName },
    },
  },
} as const;

export const SCENARIO_FILE_SCHEMA = {
  type: 'object',
  additionalProperties: false,
  required: ['scenarios'],
  properties: {
    scenarios: {
      type: 'object',
      minProperties: 1,
      propertyNames: { pattern: scenarioName },
      additionalProperties: scenario,
    },
    cycling: {
      type: 'object',
      propertyNames: { pattern: scenarioName },
      additionalProperties: scenario,
    },
    rigs: {
      type: 'object',
      propertyNames: { pattern: scenarioName },
      additionalProperties: multiRig,
    },
  },
} as const;
