import { mkdir, mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { writeCalibration } from '../../src/calibration/calibration-file.js';
import { VirtualClock } from '../../src/core/clock.js';
import type { RunResult } from '../../src/record/result.js';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { ChannelRun } from '../../src/run/channel-run.js';
import { RunRecorder } from '../../src/run/recorder.js';
import { RigLink } from '../../src/run/rig-link.js';
import { resolveRunConfig } from '../../src/run/run-config.js';
import type { RunRequest } from '../../src/run/run-request.js';
import { manifestOf } from '../../src/run/start-report.js';
import { StatusPrinter } from '../../src/run/status-line.js';
import {
  DEFAULT_SCENARIOS_PATH,
  loadScenarios,
  type SimScenario,
} from '../../src/sim/scenarios.js';
import { SimSource } from '../../src/sources/sim-source.js';
import { referenceCalibration } from './sim-run.js';

const roots: string[] = [];
afterAll(async () => {
  for (const r of roots) await rm(r, { recursive: true, force: true });
});

/**
 * A scenario run by the daemon's own parts (rig link, channel run, recorder) on a virtual clock
 * advanced as fast as the machine goes, with the scenario's calibration taken as `calibrate`
 * would take it.
 */
async function liveRun(
  scenario: SimScenario,
  root: string,
): Promise<{ folder: string; result: RunResult }> {
  const calibrationPath = join(root, 'board.cal.json');
  await writeCalibration(calibrationPath, referenceCalibration(scenario));
  const req: RunRequest = {
    sim: scenario.name,
    speed: 1,
    runs: root,
    listen: null,
    once: true,
    rotateBytes: 1 << 22,
    linkTimeoutS: 60,
    channel: scenario.rig.channel,
    calibration: calibrationPath,
  };
  const cfg = await resolveRunConfig(req, null);
  const startedWallMs = Date.UTC(2026, 11, 3, 9, 0, 0);
  const clock = new VirtualClock(0, startedWallMs);
  const link = new RigLink(new SimSource({ scenario: cfg.scenario!, clock, profile: cfg.profile }));
  const folder = join(root, 'run');
  const run = new ChannelRun({
    cfg,
    channel: scenario.rig.channel,
    linkTimeoutS: req.linkTimeoutS,
    folder,
    rotateBytes: 1 << 22,
    startedWallMs,
    clock,
    resume: null,
    status: new StatusPrinter(new PassThrough().resume()),
    send: (line) => link.send(line),
    stopInputs: async () => undefined,
    releaseLink: () => link.close(),
  });
  await mkdir(folder);
  await RunRecorder.writeManifest(
    folder,
    manifestOf({
      req,
      cfg,
      label: scenario.name,
      startedWallMs,
      source: link.source,
      calibrationId: run.pipeline.calibrationId,
    }),
  );
  await link.open(run);
  clock.setTimer(() => run.tick(), 100, true);
  run.begin();
  while (!run.isEnded && clock.now() < 8 * 3600_000) {
    clock.advance(1000);
    if (clock.now() % 60_000 === 0) await run.flush();
  }
  const end = await run.done;
  return { folder, result: end.result };
}

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
  'rig_clock_warning',
  'calibration_id',
  'chemistry',
  'cells',
] as const;

const scenarios = [...loadScenarios(DEFAULT_SCENARIOS_PATH).byName.values()];

// The same raw counts through the same measuring step and the same trapezoidal integrator
// (charge = ∫ I dt, the textbook definition) must give the live figures again.
describe("the recompute of every shipped scenario equals the daemon's live result", () => {
  it('the shipped scenario file has scenarios to check', () => {
    expect(scenarios.length).toBeGreaterThanOrEqual(4);
  });

  for (const scenario of scenarios) {
    it(`${scenario.name}: every figure of result.json to its last written digit`, async () => {
      const root = await mkdtemp(join(tmpdir(), `cv-every-${scenario.name}-`));
      roots.push(root);
      const live = await liveRun(scenario, root);
      const f = await recomputeRun(await openRunFolder(live.folder));
      const before: Record<string, unknown> = { ...live.result };
      const again: Record<string, unknown> = { ...f.result };
      expect(before['frames_accepted']).toBeGreaterThan(100);
      // The live estimate of the rig's clock takes only frames that arrived fresh, which the rows
      // do not record; the recompute fits every row, so the two may differ by a few ppm.
      expect(
        Math.abs(Number(again['rig_clock_error_ppm']) - Number(before['rig_clock_error_ppm'])),
      ).toBeLessThanOrEqual(20);
      for (const key of SAME)
        expect({ key, value: again[key] }).toEqual({ key, value: before[key] });
    }, 120_000);
  }
});
