import { resolve } from 'node:path';
import { loadCalibration, type Calibration } from '../calibration/calibration.js';
import { AnalogChain } from '../chain/analog-chain.js';
import type { RigProfile } from '../chain/rig-profile-types.js';
import { loadRigProfile } from '../chain/rig-profile.js';
import { DEFAULT_CHEMISTRIES_PATH, findChemistry, loadChemistries } from '../chemistry/chemistries.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { resolveCutoff, validateCells, type ResolvedCutoff } from '../chemistry/limits.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { packagePath } from '../core/paths.js';
import { loadScenarios, pickScenario, type SimScenario } from '../sim/scenarios.js';
import type { RunRequest } from './run-request.js';

export const DEFAULT_RIG_PATH = packagePath('config/rigs/bench-20mohm.yaml');
export const DEFAULT_SCENARIOS_PATH = packagePath('config/sim-scenarios.yaml');

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

export async function resolveRunConfig(req: RunRequest): Promise<RunConfig> {
  if ((req.port === undefined) === (req.sim === undefined)) {
    throw makeError(ErrorCodes.USAGE, 'a run needs exactly one rig', '--port / --sim', 'Give --port <device> for a real rig or --sim [scenario] for the simulated one.');
  }
  if (!(req.speed > 0) || !Number.isFinite(req.speed)) {
    throw makeError(ErrorCodes.USAGE, `speed ${req.speed} is not a positive number`, '--speed', 'Give a factor such as 1 (real time) or 200.');
  }
  if (req.port !== undefined && req.speed !== 1) {
    throw makeError(ErrorCodes.USAGE, 'a real rig runs in real time', '--speed', 'Leave --speed out with --port; it applies to the simulated rig only.');
  }
  if (!Number.isInteger(req.channel) || req.channel < 0 || req.channel > 15) {
    throw makeError(ErrorCodes.USAGE, `channel ${req.channel} is not 0..15`, '--channel', 'Give the rig channel the cell is on, 0 to 15.');
  }
  const scenario = req.sim !== undefined ? pickScenario(loadScenarios(DEFAULT_SCENARIOS_PATH), req.sim) : null;
  const rigPath = resolve(req.rig ?? DEFAULT_RIG_PATH);
  const profile = await loadRigProfile(rigPath);
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
  const chemistry = findChemistry(chemistries, chemistryId);
  const cells = validateCells(req.cells ?? scenario?.cell.cells ?? 1);
  const cutoff = resolveCutoff(chemistry, cells, req.cutoff);
  const calibrationPath = req.calibration !== undefined ? resolve(req.calibration) : null;
  const calibration = calibrationPath !== null ? await loadCalibration(calibrationPath) : null;
  return {
    request: req,
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
  };
}
