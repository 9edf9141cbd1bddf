import { readFileSync } from 'node:fs';
import { Ajv } from 'ajv';
import type { RigProfile } from '../chain/rig-profile-types.js';
import type { Clock } from '../core/clock.js';
import { parseConfigYaml } from '../core/config-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { schemaError } from '../core/schema-error.js';
import { packagePath } from '../core/paths.js';
import { ChemistryCell, type ChemistryId } from './cell-model.js';
import type { CircuitFaults } from './faults.js';
import { SCENARIO_FILE_SCHEMA } from './scenario-schema.js';
import type { SimChannelOptions, ThermistorWiring } from './sim-channel.js';
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
    /** Share of the rated capacity the cell still holds (a worn cell is below 1). */
    state_of_health?: number;
    /** Polarisation resistance per cell and its time constant (zero if omitted). */
    polarization_ohm_per_cell?: number;
    polarization_time_s?: number;
    /** A current the cell drains through itself (a soft internal short), amps. */
    leak_A?: number;
  };
  thermal: {
    ambient_C: number;
    heat_capacity_J_per_K: number;
    conductance_W_per_K: number;
    load_heat_fraction: number;
    extra_heat_W: number;
  };
  load: {
    load_ohm: number;
    mosfet_ohm: number;
    /** A constant-current load (protocol 1.1); `load_ohm` is then its source resistor. */
    constant_current?: {
      i_min_counts: number;
      i_max_counts: number;
      trim_error: number;
      ripple_A: number;
    };
  };
  /** A charger module the rig switches (protocol 1.1). */
  charger?: {
    current_A: number;
    charge_V: number;
    termination_A: number;
    heat_to_cell_W?: number;
  };
  /** The board's true imperfections, unknown to the host (the rig profile's own figures are not used). */
  front_end: {
    /** Current-channel offset as amps through the profile's shunt, or as volts at the amplifier input. */
    current_offset_A?: number;
    current_offset_V?: number;
    /** Fractional gain error of the current channel, from resistance in series with the shunt. */
    current_gain_error: number;
    voltage_gain_error: number;
    noise_counts: number;
    thermistor?: ThermistorWiring;
    /** The thermistor reads right until this long after the load first went on, then as `thermistor` says. */
    thermistor_fails_after_s?: number;
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

/** A rig of several channels in config/sim-scenarios.yaml: a cell scenario on each channel. */
export interface SimRigScenario {
  name: string;
  description: string;
  rig: Omit<SimScenario['rig'], 'channel'>;
  faults: SimScenario['faults'];
  /** Channel number to the scenario whose cell, thermal model, load and front end it has. */
  channels: ReadonlyMap<number, SimScenario>;
}

export interface ScenarioSet {
  file: string;
  /** The scenarios of rigs that speak protocol v1 (a switched resistor load). */
  byName: ReadonlyMap<string, SimScenario>;
  /**
   * The scenarios under `cycling:`: rigs with a constant-current load and a charger, speaking
   * protocol 1.1, for programs; they need a host that speaks 1.1 and a rig profile with a
   * charger monitor (config/rigs/sim-cc.yaml). Names are unique across both maps.
   */
  cycling: ReadonlyMap<string, SimScenario>;
  rigs: ReadonlyMap<string, SimRigScenario>;
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
    throw schemaError(path, err, {
      what: 'simulator scenario',
      pattern:
        'Use lower-case letters, digits and "-" for scenario names, and letters, digits, ".", "_" or "-" for ids (at most 32).',
      fallback: 'Compare it with the scenarios shipped in config/sim-scenarios.yaml.',
    });
  }
  const file = data as {
    scenarios: Record<string, Omit<SimScenario, 'name'>>;
    cycling?: Record<string, Omit<SimScenario, 'name'>>;
    rigs?: Record<string, RawRig>;
  };
  const byName = new Map<string, SimScenario>();
  for (const [name, s] of Object.entries(file.scenarios)) byName.set(name, { name, ...s });
  const cycling = new Map<string, SimScenario>();
  for (const [name, s] of Object.entries(file.cycling ?? {})) {
    if (byName.has(name))
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        `the scenario "${name}" is both under scenarios: and under cycling:`,
        `${path}, key cycling.${name}`,
        'Give each scenario its own name.',
      );
    cycling.set(name, { name, ...s });
  }
  const all = new Map([...byName, ...cycling]);
  const rigs = new Map<string, SimRigScenario>();
  for (const [name, r] of Object.entries(file.rigs ?? {}))
    rigs.set(name, resolveRig(path, name, r, all));
  return { file: path, byName, cycling, rigs };
}

type RawRig = Omit<SimRigScenario, 'name' | 'channels'> & { channels: Record<string, string> };

function resolveRig(
  path: string,
  name: string,
  raw: RawRig,
  byName: ReadonlyMap<string, SimScenario>,
): SimRigScenario {
  const channels = new Map<number, SimScenario>();
  const entries = Object.entries(raw.channels).sort(([a], [b]) => Number(a) - Number(b));
  for (const [ch, scenarioName] of entries) {
    const s = byName.get(scenarioName);
    if (!s)
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        `rig "${name}" puts the scenario "${scenarioName}" on channel ${ch}, and there is no such scenario`,
        `${path}, key rigs.${name}.channels.${ch}`,
        `Use one of: ${[...byName.keys()].join(', ')}.`,
      );
    channels.set(Number(ch), s);
  }
  return { name, description: raw.description, rig: raw.rig, faults: raw.faults, channels };
}

/** The scenario called `name`, or a usage error listing the ones there are. */
export function pickScenario(set: ScenarioSet, name: string): SimScenario {
  const s = set.byName.get(name) ?? set.cycling.get(name);
  if (s) return s;
  throw makeError(
    ErrorCodes.USAGE,
    `there is no simulator scenario "${name}"`,
    set.file,
    `Use one of: ${[...set.byName.keys(), ...set.cycling.keys()].join(', ')}.`,
  );
}

/** The rig with several channels called `name`, or a usage error listing the ones there are. */
export function pickRigScenario(set: ScenarioSet, name: string): SimRigScenario {
  const r = set.rigs.get(name);
  if (r) return r;
  throw makeError(
    ErrorCodes.USAGE,
    `there is no simulated rig "${name}" with several channels`,
    set.file,
    set.rigs.size > 0
      ? `Use one of: ${[...set.rigs.keys()].join(', ')}.`
      : 'Add one under "rigs:" (see docs/simulated-rig.md).',
  );
}

/** A channel's cell, thermal model, load and front end as the scenario describes them. */
export function channelParts(
  scenario: SimScenario,
  profile: RigProfile,
): Omit<SimChannelOptions, 'channel'> {
  const shunt = profile.current.shunt_ohm;
  const fe = scenario.front_end;
  const cell = new ChemistryCell({
    chemistry: scenario.cell.chemistry,
    cells: scenario.cell.cells,
    capacityAh: scenario.cell.capacity_Ah * (scenario.cell.state_of_health ?? 1),
    initialSoc: scenario.cell.initial_soc,
    ...(scenario.cell.internal_ohm_per_cell !== undefined
      ? { internalOhmPerCell: scenario.cell.internal_ohm_per_cell }
      : {}),
    ...cellExtras(scenario.cell),
  });
  return {
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
    thermistor: fe.thermistor ?? 'ok',
    ...regulatedParts(scenario),
    ...(fe.thermistor_fails_after_s !== undefined
      ? { thermistorFailsAfterMs: fe.thermistor_fails_after_s * 1000 }
      : {}),
  };
}

/** The optional cell figures of a 1.1 scenario, only where given. */
function cellExtras(c: SimScenario['cell']): {
  polarizationOhmPerCell?: number;
  polarizationTimeS?: number;
  leakA?: number;
} {
  return {
    ...(c.polarization_ohm_per_cell !== undefined
      ? { polarizationOhmPerCell: c.polarization_ohm_per_cell }
      : {}),
    ...(c.polarization_time_s !== undefined ? { polarizationTimeS: c.polarization_time_s } : {}),
    ...(c.leak_A !== undefined ? { leakA: c.leak_A } : {}),
  };
}

/** A scenario's constant-current load and charger (protocol 1.1), only where given. */
function regulatedParts(s: SimScenario): Pick<SimChannelOptions, 'constantCurrent' | 'charger'> {
  const cc = s.load.constant_current;
  const ch = s.charger;
  return {
    ...(cc
      ? {
          constantCurrent: {
            iMinRaw: cc.i_min_counts,
            iMaxRaw: cc.i_max_counts,
            trimError: cc.trim_error,
            rippleA: cc.ripple_A,
          },
        }
      : {}),
    ...(ch
      ? {
          charger: {
            currentA: ch.current_A,
            chargeV: ch.charge_V,
            terminationA: ch.termination_A,
            heatToCellW: ch.heat_to_cell_W ?? 0,
          },
        }
      : {}),
  };
}

/** A simulated rig built from a scenario, on the given clock and rig profile. */
export function buildSimRig(
  scenario: SimScenario,
  clock: Clock,
  profile: RigProfile,
  overrides: SimOverrides = {},
): SimRig {
  const f = scenario.faults;
  return new SimRig({
    clock,
    profile,
    ...channelParts(scenario, profile),
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

/** A simulated rig with several channels, each channel's parts from its scenario. */
export function buildMultiChannelRig(
  r: SimRigScenario,
  clock: Clock,
  profile: RigProfile,
  overrides: SimOverrides = {},
): SimRig {
  const f = r.faults;
  return new SimRig({
    clock,
    profile,
    channels: [...r.channels].map(([channel, s]) => ({ channel, ...channelParts(s, profile) })),
    clockError: overrides.clockError ?? r.rig.clock_error,
    startTick: overrides.startTick ?? 0,
    framePeriodMs: r.rig.frame_period_ms,
    rigId: r.rig.rig_id,
    firmware: r.rig.firmware,
    faults: {
      dropProbability: overrides.dropProbability ?? f.drop_probability,
      garbageProbability: overrides.garbageProbability ?? f.garbage_probability,
      burstFrames: overrides.burstFrames ?? f.burst_frames,
    },
    seed: overrides.seed ?? f.seed,
  });
}
