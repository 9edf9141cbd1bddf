import { mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeCalibration } from '../../src/calibration/calibration-file.js';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { reportRuns } from '../../src/report/report-runs.js';
import { demoScenario, referenceCalibration, simulateRun, type SimRun } from './sim-run.js';

let root: string;
let uncalibrated: SimRun;
let calibrated: SimRun;
const scenario = demoScenario();
const calibration = referenceCalibration(scenario);

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-recompute-'));
  uncalibrated = await simulateRun({ dir: join(root, 'uncal'), scenario });
  // Rows go on for 2 s after the end (the cell recovering): they must not be integrated.
  calibrated = await simulateRun({ dir: join(root, 'cal'), scenario, calibration, afterEndS: 2 });
}, 60_000);

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

const rel = (x: number, truth: number): number => Math.abs(x / truth - 1);

describe('recompute from raw counts', () => {
  it("with the run's own calibration equals the live figures (same counts, same chain, same integrator)", async () => {
    for (const run of [uncalibrated, calibrated]) {
      const f = await recomputeRun(await openRunFolder(run.folder));
      expect(run.result.end_reason).toBe('cutoff');
      // result.json rounds to 1 µAh; the logged host time to 1 ms.
      expect(f.result.capacity_Ah).toBeCloseTo(run.result.capacity_Ah, 5);
      expect(f.result.energy_Wh).toBeCloseTo(run.result.energy_Wh, 5);
      expect(f.result.duration_s).toBeCloseTo(run.result.duration_s, 1);
      expect(f.result.mean_voltage_V).toBeCloseTo(run.result.mean_voltage_V!, 4);
      expect(f.result.end_voltage_V).toBe(run.result.end_voltage_V);
      expect(f.result.frames_accepted).toBe(run.result.frames_accepted);
      expect(f.result.frames_lost).toBe(run.result.frames_lost);
      expect(f.result.frames_rejected).toBe(run.result.frames_rejected);
      expect(f.result.calibration_id).toBe(run.result.calibration_id);
      expect(f.result.end_reason).toBe('cutoff');
      // The rig's clock runs 8 % fast (the scenario's setting): the host-clock estimate finds it.
      expect(f.result.rig_clock_error_ppm! / 1e6).toBeCloseTo(0.08, 3);
      expect(f.calibration.own).toBe(true);
    }
  });

  it('the live run is off by several percent uncalibrated (simulator truth: trapezoid over the physics steps)', () => {
    expect(rel(uncalibrated.result.capacity_Ah, uncalibrated.truth.chargeAh)).toBeGreaterThan(0.03);
    expect(rel(calibrated.result.capacity_Ah, calibrated.truth.chargeAh)).toBeLessThan(0.005);
  });

  it('an uncalibrated run recomputed with a calibration recovers the truth within 0.5 %, inside its stated uncertainty', async () => {
    const f = await recomputeRun(await openRunFolder(uncalibrated.folder), {
      calibration,
      calibrationFile: 'bench.json',
    });
    const truth = uncalibrated.truth.chargeAh;
    const before = Math.abs(uncalibrated.result.capacity_Ah - truth);
    const after = Math.abs(f.result.capacity_Ah - truth);
    expect(after).toBeLessThan(before / 5);
    expect(after / truth).toBeLessThan(0.005);
    expect(after).toBeLessThanOrEqual(f.result.uncertainty.capacity_Ah.expanded);
    expect(Math.abs(f.result.energy_Wh - uncalibrated.truth.energyWh)).toBeLessThanOrEqual(
      f.result.uncertainty.energy_Wh.expanded,
    );
    expect(f.calibration.own).toBe(false);
    expect(f.result.calibration_id).toBe(calibration.id);
    expect(f.notes.join(' ')).toContain(`applies ${calibration.id} to every row`);
  });

  it('the uncalibrated budget covers the uncalibrated error', () => {
    const err = Math.abs(uncalibrated.result.capacity_Ah - uncalibrated.truth.chargeAh);
    expect(err).toBeLessThanOrEqual(uncalibrated.result.uncertainty.capacity_Ah.expanded);
  });

  it('writing keeps the original: result-<calibration id>.json beside result.json, report-<id>.html for another calibration', async () => {
    const original = await readFile(join(uncalibrated.folder, 'result.json'), 'utf8');
    const calFile = join(root, 'bench-cal.json');
    await writeCalibration(calFile, calibration);
    const out = await reportRuns({
      folders: [uncalibrated.folder],
      calibrationFile: calFile,
      generatedAt: '2026-12-03T10:00:00Z',
    });
    expect(await readFile(join(uncalibrated.folder, 'result.json'), 'utf8')).toBe(original);
    expect(out.runs[0]!.resultPath).toBe(
      join(uncalibrated.folder, `result-${calibration.id}.json`),
    );
    expect(out.runs[0]!.reportPath).toBe(
      join(uncalibrated.folder, `report-${calibration.id}.html`),
    );
    const written = JSON.parse(await readFile(out.runs[0]!.resultPath, 'utf8')) as {
      capacity_Ah: number;
      calibration_id: string;
      recomputed: { calibration_file: string };
    };
    expect(written.calibration_id).toBe(calibration.id);
    expect(written.recomputed.calibration_file).toBe(calFile);
    expect(written.capacity_Ah).toBe(out.runs[0]!.figures.result.capacity_Ah);
  });

  it('capacity down to each 0.05 V step falls with the voltage and ends at the whole run', async () => {
    const f = await recomputeRun(await openRunFolder(calibrated.folder), { stepPerCellV: 0.05 });
    const reached = f.steps.filter((s) => s.reached);
    expect(reached.length).toBeGreaterThan(10);
    for (let i = 1; i < reached.length; i++) {
      expect(reached[i]!.perCellV).toBeLessThan(reached[i - 1]!.perCellV);
      expect(reached[i]!.chargeAh!).toBeGreaterThanOrEqual(reached[i - 1]!.chargeAh!);
    }
    const last = f.steps.at(-1)!;
    expect(last.perCellV).toBe(3.0);
    expect(last.reached).toBe(true);
    // The cutoff trips once the voltage has stayed below it for 0.5 s and 3 frames: a few frames more.
    expect(last.chargeAh!).toBeLessThanOrEqual(f.result.capacity_Ah);
    expect(last.chargeAh!).toBeGreaterThan(f.result.capacity_Ah * 0.99);
    expect(f.result.midpoint_voltage_V!).toBeLessThan(reached[0]!.perCellV);
    expect(f.result.midpoint_voltage_V!).toBeGreaterThan(3.0);
  });

  it("DC resistance at switch-on matches the simulated cell's 50 mΩ; from the recovery at switch-off it has risen near empty", async () => {
    const f = await recomputeRun(await openRunFolder(calibrated.folder));
    const on = f.resistance.switch_on!;
    const off = f.resistance.switch_off!;
    expect(on.count).toBe(1);
    expect(off.count).toBe(1);
    // The rig senses the cell terminals, so the step is across the cell's own 50 mΩ (the
    // scenario's setting) plus one frame of polarisation; quantisation adds a few mΩ either way.
    expect(on.first.ohm).toBeGreaterThan(0.045);
    expect(on.first.ohm).toBeLessThan(0.058);
    // A cell's resistance rises as it nears empty (common practice); the simulated cell's rises
    // to at most 2.5 times its full value.
    expect(off.first.ohm).toBeGreaterThan(on.first.ohm);
    expect(off.first.ohm).toBeLessThan(0.13);
    expect(f.result.dc_resistance_ohm).toBe(Number(on.first.ohm.toFixed(5)));
  });

  it('--rated gives the C-rate and the share of the rating', async () => {
    const f = await recomputeRun(await openRunFolder(calibrated.folder), { ratedAh: 0.06 });
    expect(f.result.c_rate!).toBeCloseTo(f.result.average_current_A! / 0.06, 3);
    expect(f.result.percent_of_rated!).toBeCloseTo((f.result.capacity_Ah / 0.06) * 100, 1);
    // Li-ion at about 20 C is nowhere near 0.2 It: the check says the method was not followed.
    expect(f.verdict!.outcome).toBe('method_not_followed');
    expect(f.verdict!.label).toBe('a check against the method of IEC 61960-3, not a certification');
  });
});
