import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { DEFAULT_SCENARIOS_PATH, loadScenarios } from '../../src/sim/scenarios.js';
import { referenceCalibration, simulateRun } from './sim-run.js';

const roots: string[] = [];
afterAll(async () => {
  for (const r of roots) await rm(r, { recursive: true, force: true });
});

/** The keys of result.json that a recompute with the run's own calibration must give again, digit for digit. */
const SAME = [
  'capacity_Ah',
  'energy_Wh',
  'duration_s',
  'end_reason',
  'end_detail',
  'load_off_confirmed',
  'mean_voltage_V',
  'end_voltage_V',
  'cutoff_V',
  'frames_accepted',
  'frames_rejected',
  'frames_lost',
  'gaps',
  'bridged_Ah',
  'rig_clock_error_ppm',
  'rig_clock_warning',
  'calibration_id',
  'chemistry',
  'cells',
] as const;

// The same raw counts through the same measuring step and the same trapezoidal integrator
// (charge = ∫ I dt, the textbook definition) must give the live figures again.
const scenarios = [...loadScenarios(DEFAULT_SCENARIOS_PATH).byName.values()];

describe('the recompute of every shipped scenario equals its live result', () => {
  it('the shipped scenario file has scenarios to check', () => {
    expect(scenarios.length).toBeGreaterThanOrEqual(4);
  });

  for (const scenario of scenarios) {
    it(`${scenario.name}: every figure of result.json to its last written digit`, async () => {
      const root = await mkdtemp(join(tmpdir(), `cv-every-${scenario.name}-`));
      roots.push(root);
      const run = await simulateRun({
        dir: root,
        scenario,
        calibration: referenceCalibration(scenario),
      });
      const f = await recomputeRun(await openRunFolder(run.folder));
      const live: Record<string, unknown> = { ...run.result };
      const again: Record<string, unknown> = { ...f.result };
      for (const key of SAME) expect({ key, value: again[key] }).toEqual({ key, value: live[key] });
    }, 120_000);
  }
});
