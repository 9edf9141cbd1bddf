import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulatedBoardCalibration } from './front-end-calibration.js';
import { onlyRunFolder, readJson, startDaemon, startPtyRig, type PtyRig } from './pty-helpers.js';

interface Result {
  capacity_Ah: number;
  energy_Wh: number;
  end_reason: string;
  frames_accepted: number;
  frames_rejected: number;
  frames_lost: number;
  rig_clock_error_ppm: number;
  calibration_id: string;
  end_voltage_V: number;
  cutoff_V: number;
  load_off_confirmed: boolean;
}

// A rig whose clock runs 20 % fast, batching 5 frames per write, dropping and garbling some,
// over a real pseudo-terminal: the figures must come from host time, not the rig's.
describe('end to end over a pseudo-terminal: discharge to the cutoff', () => {
  let rig: PtyRig;
  let result: Result;
  let exitCode: number | null;
  let stdout = '';

  beforeAll(async () => {
    rig = await startPtyRig('quick', [
      '--clock-error',
      '0.2',
      '--burst',
      '5',
      '--drop',
      '0.01',
      '--garbage',
      '0.01',
      '--seed',
      '77',
    ]);
    const cal = simulatedBoardCalibration('quick');
    const calPath = join(rig.dir, 'cal.json');
    writeFileSync(calPath, JSON.stringify(cal));
    const runs = join(rig.dir, 'runs');
    const d = startDaemon([
      '--port',
      rig.hostPath,
      '--chemistry',
      'li-ion',
      '--calibration',
      calPath,
      '--once',
      '--no-live',
      '--runs',
      runs,
    ]);
    exitCode = await d.exit;
    stdout = d.stdout();
    // Let the simulator record the final load switch before it is stopped.
    await new Promise((r) => setTimeout(r, 500));
    await rig.stop();
    result = readJson<Result>(join(onlyRunFolder(runs), 'result.json'));
  }, 120_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('ends at the cutoff with exit code 0 and the load-off confirmed', () => {
    expect(exitCode, stdout).toBe(0);
    expect(result.end_reason).toBe('cutoff');
    expect(result.load_off_confirmed).toBe(true);
  });

  it("capacity within 0.5 % of the simulator's own integral of the true current (charge = ∫ I dt, physics)", () => {
    const truth = rig.readTruth().truth;
    expect(truth.chargeAh).toBeGreaterThan(0.006);
    expect(Math.abs(result.capacity_Ah - truth.chargeAh) / truth.chargeAh).toBeLessThan(0.005);
    expect(Math.abs(result.energy_Wh - truth.energyWh) / truth.energyWh).toBeLessThan(0.01);
  });

  it('the simulated rig saw the host switch the load on, then off, and it stayed off', () => {
    const log = rig.readTruth().load_log;
    expect(log.map((s) => [s.on, s.cause])).toEqual([
      [true, 'host'],
      [false, 'host'],
    ]);
    expect(rig.readTruth().truth.loadOn).toBe(false);
  });

  it('counts the garbage lines as rejected and the dropped frames as lost', () => {
    expect(result.frames_rejected).toBeGreaterThan(0);
    expect(result.frames_lost).toBeGreaterThan(0);
    expect(result.frames_accepted).toBeGreaterThan(200);
  });

  it('estimates the rig clock error within 1 % of the true +20 %', () => {
    expect(Math.abs(result.rig_clock_error_ppm - 200_000)).toBeLessThan(2_000);
  });

  it('logs the calibration id with the result', () => {
    expect(result.calibration_id).toMatch(/^[0-9a-f]{16}$/);
  });
});
