import { readFileSync } from 'node:fs';
import { Ajv, type ErrorObject } from 'ajv';
import type { RigProfile } from '../chain/rig-profile-types.js';
import type { Clock } from '../core/clock.js';
import { parseConfigYaml } from '../core/config-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { packagePath } from '../core/paths.js';
import { ChemistryCell, type ChemistryId } from './cell-model.js';
import type { CircuitFaults } from './faults.js';
import { SCENARIO_FILE_SCHEMA } from './scenario-schema.js';
import { SimRig } from './sim-rig.js';

/** One named scenario of config/sim-scenarios.yaml, after validation (defaults filled in). */
/** The scenarios shipped with the package (`--sim <name>`). */
export const DEFAULT_SCENARIOS_PATH = packagePath('config/sim-scenarios.yaml');

export interface SimScenario {
  name: string;
  description: string;
  cell: {
    chemistry: ChemistryId;
    cells: number;
    capacity_Ah: number;
    initial_soc: number;
    internal_ohm_per_cell?: number;
  };
  thermal: {
    ambient_C: number;
    heat_capacity_J_per_K: number;
    conductance_W_per_K: number;
    load_heat_fraction: number;
    extra_heat_W: number;
  };
  load: { load_ohm: number; mosfet_ohm: number };
  /** The board's true imperfections, unknown to the host (the rig profile's own figures are not used). */
  front_end: {
    /** Current-channel offset as amps through the profile's shunt, or as volts at the amplifier input. */
    current_offset_A?: number;
    current_offset_V?: number;
    /** Fractional gain error of the current channel, from resistance in series with the shunt. */
    current_gain_error: number;
    voltage_gain_error: number;
    noise_counts: number;
  };
  rig: {
    rig_id: string;
    firmware: string;
    clock_error: number;
    frame_period_ms: number;
    channel: number;
  };
  faults: {
    drop_probability: number;
    garbage_probability: number;
    burst_frames: number;
    seed: number;
  };
}

export interface ScenarioSet {
  file: string;
  byName: ReadonlyMap<string, SimScenario>;
}

/** What tests (and the command line) may change on top of a scenario. */
export interface SimOverrides {
  clockError?: number;
  burstFrames?: number;
  dropProbability?: number;
  garbageProbability?: number;
  seed?: number;
  startTick?: number;
  circuit?: CircuitFaults;
}

// strictRequired off: the current offset's oneOf names keys declared on the parent object.
const ajv = new Ajv({
  allErrors: false,
  useDefaults: true,
  verbose: true,
  strict: true,
  strictRequired: false,
});
const validateFile = ajv.compile(SCENARIO_FILE_SCHEMA);

/** Reads and validates a scenario file; every failure names the file, the key and the fix. */
export function loadScenarios(path: string): ScenarioSet {
  let text: string;
  try {
    text = readFileSync(path, 'utf8');
  } catch (e) {
    throw makeError(
      ErrorCodes.CONFIG_READ,
      `cannot read the scenario file: ${(e as Error).message}`,
      path,
      'Check the path and the file permissions.',
    );
  }
  const data = parseConfigYaml(
    text,
    'scenario file',
    path,
    'Fix the YAML syntax at the line given.',
  );
  if (!validateFile(data)) {
    const err = validateFile.errors?.[0];
    if (!err)
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        'the scenario file is invalid',
        path,
        'Compare it with the shipped config/sim-scenarios.yaml.',
      );
    throw schemaError(path, err);
  }
  const raw = (data as { scenarios: Record<string, Omit<SimScenario, 'name'>> }).scenarios;
  const byName = new Map<string, SimScenario>();
  for (const [name, s] of Object.entries(raw)) byName.set(name, { name, ...s });
  return { file: path, byName };
}

/** The scenario called `name`, or a usage error listing the ones there are. */
export function pickScenario(set: ScenarioSet, name: string): SimScenario {
  const s = set.byName.get(name);
  if (s) return s;
  throw makeError(
    ErrorCodes.USAGE,
    `there is no simulator scenario "${name}"`,
    set.file,
    `Use one of: ${[...set.byName.keys()].join(', ')}.`,
  );
}

/** A simulated rig built from a scenario, on the given clock and rig profile. */
export function buildSimRig(
  scenario: SimScenario,
  clock: Clock,
  profile: RigProfile,
  overrides: SimOverrides = {},
): SimRig {
  const shunt = profile.current.shunt_ohm;
  const fe = scenario.front_end;
  const f = scenario.faults;
  const cell = new ChemistryCell({
    chemistry: scenario.cell.chemistry,
    cells: scenario.cell.cells,
    capacityAh: scenario.cell.capacity_Ah,
    initialSoc: scenario.cell.initial_soc,
    ...(scenario.cell.internal_ohm_per_cell !== undefined
      ? { internalOhmPerCell: scenario.cell.internal_ohm_per_cell }
      : {}),
  });
  return new SimRig({
    clock,
    profile,
    cell,
    thermal: {
      ambientC: scenario.thermal.ambient_C,
      heatCapacityJPerK: scenario.thermal.heat_capacity_J_per_K,
      conductanceWPerK: scenario.thermal.conductance_W_per_K,
      loadHeatFraction: scenario.thermal.load_heat_fraction,
      extraHeatW: scenario.thermal.extra_heat_W,
    },
    loadOhm: scenario.load.load_ohm,
    mosfetOhm: scenario.load.mosfet_ohm,
    frontEnd: {
      inputOffsetV: fe.current_offset_V ?? (fe.current_offset_A ?? 0) * shunt,
      connectionOhm: fe.current_gain_error * shunt,
      voltageGainError: fe.voltage_gain_error,
      noiseCounts: fe.noise_counts,
    },
    clockError: overrides.clockError ?? scenario.rig.clock_error,
    startTick: overrides.startTick ?? 0,
    framePeriodMs: scenario.rig.frame_period_ms,
    channel: scenario.rig.channel,
    rigId: scenario.rig.rig_id,
    firmware: scenario.rig.firmware,
    faults: {
      dropProbability: overrides.dropProbability ?? f.drop_probability,
      garbageProbability: overrides.garbageProbability ?? f.garbage_probability,
      burstFrames: overrides.burstFrames ?? f.burst_frames,
    },
    seed: overrides.seed ?? f.seed,
    ...(overrides.circuit ? { circuit: overrides.circuit } : {}),
  });
}

/** A key below `parent` as the user would look for it; odd names (spaces, punctuation) quoted. */
function childKey(parent: string, child: string): string {
  const shown = /^[A-Za-z0-9_-]+$/.test(child) ? child : JSON.stringify(child);
  return parent === '(top level)' ? shown : `${parent}.${shown}`;
}

function schemaError(file: string, err: ErrorObject): Error {
  const key = err.instancePath.split('/').filter(Boolean).join('.') || '(top level)';
  const p = err.params as Record<string, unknown>;
  let fix: string;
  let where = key;
  switch (err.keyword) {
    case 'required':
      where = childKey(key, String(p.missingProperty));
      fix = `Add the key "${String(p.missingProperty)}".`;
      break;
    case 'additionalProperties': {
      where = childKey(key, String(p.additionalProperty));
      const allowed = Object.keys((err.parentSchema?.properties as object | undefined) ?? {});
      fix = `Remove or rename ${JSON.stringify(String(p.additionalProperty))}; the keys allowed here are: ${allowed.join(', ')}.`;
      break;
    }
    case 'type':
      fix = `Make it a ${String(p.type)}.`;
      break;
    case 'minimum':
    case 'maximum':
    case 'exclusiveMinimum':
    case 'exclusiveMaximum':
      fix = `Use a value ${String(p.comparison)} ${String(p.limit)}.`;
      break;
    case 'enum':
      fix = `Use one of: ${(p.allowedValues as unknown[]).join(', ')}.`;
      break;
    case 'oneOf': {
      const keys = (err.schema as Array<{ required: string[] }>).flatMap((alt) => alt.required);
      fix = `Give exactly one of: ${keys.join(', ')}.`;
      break;
    }
    case 'pattern':
    case 'propertyNames':
      fix =
        'Use lower-case letters, digits and "-" for scenario names, and letters, digits, ".", "_" or "-" for ids (at most 32).';
      break;
    default:
      fix = 'Compare it with the scenarios shipped in config/sim-scenarios.yaml.';
  }
  return makeError(
    ErrorCodes.CONFIG_INVALID,
    `invalid simulator scenario setting: ${key} ${err.message ?? ''}`.trim(),
    `${file}, key ${where}`,
    fix,
  );
}
