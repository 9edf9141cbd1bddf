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
import { parseProgram } from '../program/program-file.js';
import { planProgram } from '../program/program-plan.js';
import type { Plan } from '../program/program-types.js';

/** A program run's program: where it came from, its text as read and its resolved plan. */
export interface RunProgram {
  where: string;
  text: string;
  plan: Plan;
}

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
  /** A program run's program: the file as given and its plan for this chemistry and cells. */
  program: RunProgram | null;
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

/**
 * A program run cut off by a crash is not continued: its cut step would need its own precheck
 * and a new segment, which this version does not do. Refused before anything is opened.
 */
function programResumeRefused(req: RunRequest, name: string): Error {
  return makeError(
    ErrorCodes.USAGE,
    `the run was running program "${name}"; a program run cannot be resumed`,
    `--resume ${req.resume ?? ''}`,
    'Run `cellvigil report` on the folder for what it recorded up to the interruption (the cut step is recorded as interrupted), then start the program again with --new as a new run.',
  );
}

/** Reads `--program` and plans it against the chemistry and cells, before anything is opened. */
async function readRunProgram(
  req: RunRequest,
  chemistry: ChemistryProfile,
  cells: number,
): Promise<RunProgram | null> {
  if (req.program === undefined) {
    if (req.rated !== undefined)
      throw makeError(
        ErrorCodes.USAGE,
        '--rated applies to a program run',
        '--rated',
        'Give it with --program <file>, or leave it out.',
      );
    return null;
  }
  if (req.schedule !== undefined || req.cutoff !== undefined)
    throw makeError(
      ErrorCodes.USAGE,
      'a program sets each discharge itself',
      req.schedule !== undefined ? '--schedule' : '--cutoff',
      "Leave it out with --program; write the cutoff in the program's discharge step (cutoff_V_per_cell).",
    );
  if (req.rated !== undefined && !(req.rated > 0 && Number.isFinite(req.rated)))
    throw makeError(
      ErrorCodes.USAGE,
      `rated capacity ${req.rated} Ah is not a positive number`,
      '--rated',
      'Give the capacity printed on the cell, in Ah, e.g. 2.5.',
    );
  const where = resolve(req.program);
  const text = await readConfigText(
    where,
    'program file',
    'Check the path; the shipped examples are in config/programs/.',
  );
  const file = parseProgram(text, where);
  const plan = planProgram(file, {
    profile: chemistry,
    cells,
    where,
    ...(req.rated !== undefined ? { ratedAh: req.rated } : {}),
  });
  return { where, text, plan };
}

export async function resolveRunConfig(
  req: RunRequest,
  resumed: RunManifest | null = null,
): Promise<RunConfig> {
  if (resumed) {
    if (resumed.program) throw programResumeRefused(req, resumed.program.name);
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
  const program = await readRunProgram(req, chemistry, cells);
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
    program,
  };
}
