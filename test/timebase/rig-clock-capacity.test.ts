import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { demoScenario, referenceCalibration, simulateRun } from '../report/sim-run.js';

let root: string;
beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-rig-clock-'));
});
afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

// Charge is the time integral of current (physics): the host times the run, so the rig's own
// clock, fast or slow, must not move the capacity. The truth is the simulator's trapezoid over
// its 10 ms physics steps. A calibrated rig at 20 frames a second (50 rig ms a frame),
// delivered in clumps of four frames (about 200 ms), with a few lost frames and garbage lines.
describe('a rig clock off by up to ±30 %, frames in bursts, through the pipeline and sinks', () => {
  for (const clockError of [-0.3, -0.2, 0, 0.2, 0.3]) {
    it(`clock ${clockError >= 0 ? '+' : ''}${clockError * 100} %: capacity within 0.05 % of the truth`, async () => {
      const scenario = demoScenario({
        rig: {
          rig_id: 'simrig-clock',
          firmware: 'sim-1.0',
          clock_error: clockError,
          frame_period_ms: 50,
          channel: 0,
        },
        faults: { drop_probability: 0.002, garbage_probability: 0.002, burst_frames: 4, seed: 99 },
      });
      const run = await simulateRun({
        dir: join(root, `clock${clockError}`),
        scenario,
        calibration: referenceCalibration(scenario),
      });
      expect(run.result.end_reason).toBe('cutoff');
      const err = run.result.capacity_Ah / run.truth.chargeAh - 1;
      expect(Math.abs(err)).toBeLessThan(5e-4);
      // The rate estimate finds the rig's clock error (ppm, positive = fast) within 0.1 %.
      expect(Math.abs(run.result.rig_clock_error_ppm! - clockError * 1e6)).toBeLessThan(1000);
    });
  }
});
