import { resolve } from 'node:path';
import type { Calibration } from '../calibration/calibration.js';
import { loadCalibration } from '../calibration/calibration-file.js';
import { AnalogChain } from '../chain/analog-chain.js';
import type { RigProfile } from '../chain/rig-profile-types.js';
import { DEFAULT_RIG_PATH, loadRigProfile } from '../chain/rig-profile-file.js';
import { findChemistry } from '../chemistry/chemistries.js';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../chemistry/chemistry-file.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { resolveCutoff, validateCells, type ResolvedCutoff } from '../chemistry/limits.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { CELL_ID_PATTERN } from '../registry/run-record.js';
import {
  DEFAULT_SCENARIOS_PATH,
  loadScenarios,
  pickScenario,
  type SimScenario,
} from '../sim/scenarios.js';
import type { RunManifest } from '../record/manifest.js';
import { parseScheduleOption, type Schedule } from '../schedule/schedule.js';
import { parseScheduleYaml } from '../schedule/schedule-file.js';
import { readConfigText } from '../core/config-file.js';
import { existsSync } from 'node:fs';
import type { RunRequest } from './run-request.js';

/** Everything a run needs, checked before anything is opened or switched. */
export interface RunConfig {
  request: RunRequest;
  rigPath: string;
  profile: RigProfile;
  chain: AnalogChain;
  chemistries: ChemistryProfile[];
  chemistry: ChemistryProfile;
  cells: number;
  cutoff: ResolvedCutoff;
  floorV: number;
  maxTemperatureC: number;
  maxCurrentA: number;
  calibrationPath: string | null;
  calibration: Calibration | null;
  scenario: SimScenario | null;
  schedule: Schedule | null;
  /** The schedule as given (file content or option text), for the manifest and a resume. */
  scheduleSource: { kind: 'file' | 'option'; text: string; where: string } | null;
  /** What is written on the cell (a resumed run keeps its own); null when none was given. */
  cellId: string | null;
}

/** `--schedule` names a file (YAML) or is written inline ("on 15 s every 1 min, 8 h per day, to 1.0 V"). */
async function readScheduleSource(
  given: string,
): Promise<{ kind: 'file' | 'option'; text: string; where: string }> {
  if (existsSync(given))
    return {
      kind: 'file',
      text: await readConfigText(given, 'schedule file', 'Check the path given with --schedule.'),
      where: resolve(given),
    };
  return { kind: 'option', text: given, where: '--schedule' };
}

export function parseScheduleSource(src: {
  kind: 'file' | 'option';
  text: string;
  where: string;
}): Schedule {
  return src.kind === 'file'
    ? parseScheduleYaml(src.text, src.where)
    : parseScheduleOption(src.text, src.where);
}

/**
 * The over-current limit: the rig profile's own, and never above 98 % of the chain's full
 * scale, since a reading pinned at the top count hides how much current really flows.
 */
function currentLimit(profile: RigProfile, chain: AnalogChain): number {
  const fullScaleA = 0.98 * chain.fullScale().amps;
  const rigLimit = profile.limits?.max_current_A;
  return rigLimit !== undefined ? Math.min(rigLimit, fullScaleA) : fullScaleA;
}

/** A resumed run keeps its rig, chemistry, cells, cutoff and channel: a different one asked for is refused. */
function checkSameRun(req: RunRequest, m: RunManifest): void {
  const where = `--resume ${req.resume ?? ''}`;
  const clash = (what: string, asked: unknown, had: unknown): never => {
    throw makeError(
      ErrorCodes.USAGE,
      `the run was started with ${what} ${String(had)}, not ${String(asked)}`,
      where,
      `Leave ${what} out when resuming (the run's own settings apply), or start a new run for a different cell.`,
    );
  };
  if (req.chemistry !== undefined && req.chemistry !== m.chemistry.id)
    clash('--chemistry', req.chemistry, m.chemistry.id);
  if (req.cells !== undefined && req.cells !== m.cells) clash('--cells', req.cells, m.cells);
  if (req.cutoff !== undefined && Math.abs(req.cutoff - m.cutoff_per_cell_V) > 1e-9)
    clash('--cutoff', req.cutoff, m.cutoff_per_cell_V);
  if (req.channel !== m.channel) clash('--channel', req.channel, m.channel);
}

/** The options that need no file: one rig, a speed only for the simulated one, a link timeout, a channel, a cell id. */
function checkRunOptions(req: RunRequest): void {
  if (req.cellId !== undefined && !CELL_ID_PATTERN.test(req.cellId))
    throw makeError(
      ErrorCodes.USAGE,
      `cell id "${req.cellId}" is not 1 to 64 letters, digits or . _ : / - starting with a letter or digit`,
      '--cell',
      'Write the id as it is on the cell with those characters (the registry files runs by it), e.g. A-017.',
    );
  if ((req.port === undefined) === (req.sim === undefined)) {
    throw makeError(
      ErrorCodes.USAGE,
      'a run needs exactly one rig',
      '--port / --sim',
      'Give --port <device> for a real rig or --sim [scenario] for the simulated one.',
    );
  }
  if (!(req.speed > 0) || !Number.isFinite(req.speed)) {
    throw makeError(
      ErrorCodes.USAGE,
      `speed ${req.speed} is not a positive number`,
      '--speed',
      'Give a factor such as 1 (real time) or 200.',
    );
  }
  if (req.port !== undefined && req.speed !== 1) {
    throw makeError(
      ErrorCodes.USAGE,
      'a real rig runs in real time',
      '--speed',
      'Leave --speed out with --port; it applies to the simulated rig only.',
    );
  }
  if (!(req.linkTimeoutS > 0)) {
    throw makeError(
      ErrorCodes.USAGE,
      `link timeout ${req.linkTimeoutS} s is not a positive number`,
      '--link-timeout',
      'Give the seconds an unplugged port may stay away, e.g. 60.',
    );
  }
  if (!Number.isInteger(req.channel) || req.channel < 0 || req.channel > 15) {
    throw makeError(
      ErrorCodes.USAGE,
      `channel ${req.channel} is not 0..15`,
      '--channel',
      'Give the rig channel the cell is on, 0 to 15.',
    );
  }
}

/**
 * A schedule's "to … V" and --cutoff are two end points: differing, one would lose silently
 * while the header shows the other, so the run is refused and the user picks one.
 */
function checkEndPoints(cutoffPerCell: number | undefined, schedule: Schedule | null): void {
  const endPoint = schedule?.endPointVPerCell ?? null;
  if (cutoffPerCell === undefined || endPoint === null) return;
  if (Math.abs(cutoffPerCell - endPoint) < 0.0005) return;
  throw makeError(
    ErrorCodes.USAGE,
    `the schedule ends at ${endPoint} V per cell ("to ${endPoint} V") but --cutoff says ${cutoffPerCell} V`,
    '--cutoff / --schedule',
    `Give one end point: leave --cutoff out (the schedule's ${endPoint} V applies), or drop "to ${endPoint} V" from the schedule.`,
  );
}

export async function resolveRunConfig(
  req: RunRequest,
  resumed: RunManifest | null = null,
): Promise<RunConfig> {
  if (resumed) {
    checkSameRun(req, resumed);
    req = {
      ...req,
      chemistry: resumed.chemistry.id,
      cells: resumed.cells,
      cutoff: resumed.cutoff_per_cell_V,
    };
  }
  checkRunOptions(req);
  const scenario =
    req.sim !== undefined ? pickScenario(loadScenarios(DEFAULT_SCENARIOS_PATH), req.sim) : null;
  const rigPath = resumed?.rig.file ?? resolve(req.rig ?? DEFAULT_RIG_PATH);
  // A resumed run converts counts through the same chain it started with: the manifest's copy.
  const profile = resumed ? resumed.rig.profile : await loadRigProfile(rigPath);
  const chain = new AnalogChain(profile);
  const chemistries = loadChemistries(req.chemistriesFile ?? DEFAULT_CHEMISTRIES_PATH);
  const chemistryId = req.chemistry ?? scenario?.cell.chemistry;
  if (chemistryId === undefined) {
    throw makeError(
      ErrorCodes.USAGE,
      'the chemistry of the cell is not given',
      '--chemistry',
      `Name it, e.g. --chemistry li-ion; one of: ${chemistries.map((c) => c.id).join(', ')}. Cutoff and limits depend on it.`,
    );
  }
  const chemistry = resumed ? resumed.chemistry.profile : findChemistry(chemistries, chemistryId);
  const cells = validateCells(req.cells ?? scenario?.cell.cells ?? 1);
  const kept = resumed?.schedule;
  const resumedSchedule = kept ? { kind: kept.kind, text: kept.text, where: kept.where } : null;
  const scheduleSource =
    resumedSchedule ?? (req.schedule !== undefined ? await readScheduleSource(req.schedule) : null);
  const schedule = scheduleSource ? parseScheduleSource(scheduleSource) : null;
  if (!resumed) checkEndPoints(req.cutoff, schedule);
  const endPoint = req.cutoff ?? schedule?.endPointVPerCell ?? undefined;
  const resolved = resolveCutoff(
    chemistry,
    cells,
    endPoint,
    req.cutoff !== undefined ? '--cutoff' : "the schedule's end point",
  );
  // A resumed run's cutoff is the one it started with, from wherever that came.
  const cutoff = resumed ? { ...resolved, source: resumed.cutoff_source } : resolved;
  const calibrationPath =
    req.calibration !== undefined ? resolve(req.calibration) : (resumed?.calibration.file ?? null);
  const calibration =
    req.calibration !== undefined
      ? await loadCalibration(calibrationPath!)
      : (resumed?.calibration.content ?? null);
  return {
    request: req,
    cellId: resumed?.cell_id ?? req.cellId ?? null,
    rigPath,
    profile,
    chain,
    chemistries,
    chemistry,
    cells,
    cutoff,
    floorV: chemistry.floor_V_per_cell.value * cells,
    maxTemperatureC: chemistry.max_temperature_C.value,
    maxCurrentA: currentLimit(profile, chain),
    calibrationPath,
    calibration,
    scenario,
    schedule,
    scheduleSource,
  };
}
