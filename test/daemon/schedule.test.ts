import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { startRun } from '../../src/run/daemon.js';
import type { SimSource } from '../../src/sources/sim-source.js';
import { simulatedBoardCalibration } from '../e2e/front-end-calibration.js';

// A duty-cycle discharge: charge is the time integral of current (physics), so what the
// daemon reports must equal what flowed during the on-times the rig really saw.
describe('a scheduled discharge on the simulated rig', () => {
  it('on 3 s every 5 s: the rig switches as scheduled and the charge is that of the on-times', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cv-sched-'));
    const calPath = join(dir, 'cal.json');
    writeFileSync(calPath, JSON.stringify(simulatedBoardCalibration('quick')));
    const out = new PassThrough();
    out.resume();
    const run = await startRun(
      {
        sim: 'quick',
        speed: 10,
        runs: join(dir, 'runs'),
        listen: null,
        once: true,
        rotateBytes: 1 << 24,
        channel: 0,
        linkTimeoutS: 60,
        calibration: calPath,
        schedule: 'on 3 s every 5 s',
      },
      { out, err: out },
    );
    const outcome = await run.done;
    const rig = (run.source as SimSource).rig;
    expect(outcome.result.end_reason).toBe('cutoff');
    expect(outcome.result.schedule).toMatch(/on 3 s every 5 s/);
    const log = rig.loadLog();
    const ons = log.filter((s) => s.on);
    expect(ons.length).toBeGreaterThan(5);
    // Every on-period but the last (ended by the cutoff) lasted the scheduled 3 s, within a frame.
    for (let i = 0; i + 1 < log.length - 1; i += 2) {
      expect(log[i]!.on).toBe(true);
      expect(log[i + 1]!.on).toBe(false);
      expect(Math.abs(log[i + 1]!.atMs - log[i]!.atMs - 3000)).toBeLessThan(150);
    }
    const truth = rig.truth();
    expect(Math.abs(outcome.result.duration_s - truth.loadOnS) / truth.loadOnS).toBeLessThan(0.02);
    expect(Math.abs(outcome.result.capacity_Ah - truth.chargeAh) / truth.chargeAh).toBeLessThan(
      0.01,
    );
    expect(outcome.result.service_output_h).toBeCloseTo(outcome.result.duration_s / 3600, 6);
  }, 60_000);
});
