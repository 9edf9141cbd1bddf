import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulatedBoardCalibration } from './front-end-calibration.js';
import {
  onlyRunFolder,
  readJson,
  sampleRows,
  startDaemon,
  startPtyRig,
  type PtyRig,
} from './pty-helpers.js';

// The daemon dies with SIGKILL mid-discharge; the rig's watchdog cuts the load; the daemon is
// started again on the same port and finishes the run.
describe('end to end over a pseudo-terminal: SIGKILL, restart, finish', () => {
  let rig: PtyRig;
  let folder: string;
  let before: string[];
  let exitCode: number | null;
  let output = '';
  let result: {
    capacity_Ah: number;
    end_reason: string;
    frames_accepted: number;
    frames_lost: number;
  };

  beforeAll(async () => {
    rig = await startPtyRig('quick', ['--seed', '11']);
    const calPath = join(rig.dir, 'cal.json');
    writeFileSync(calPath, JSON.stringify(simulatedBoardCalibration('quick')));
    const runs = join(rig.dir, 'runs');
    const args = [
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
    ];
    const first = startDaemon(args);
    const until = Date.now() + 20_000;
    while (!rig.readTruth().truth.loadOn) {
      if (Date.now() > until) throw new Error(`the load never went on: ${first.stdout()}`);
      await new Promise((r) => setTimeout(r, 100));
    }
    await new Promise((r) => setTimeout(r, 8000));
    first.child.kill('SIGKILL');
    await first.exit;
    folder = onlyRunFolder(runs);
    before = sampleRows(folder);
    // Long enough for the rig's watchdog (5 s) to cut the load.
    await new Promise((r) => setTimeout(r, 6500));
    const second = startDaemon(args);
    exitCode = await second.exit;
    output = second.stdout() + second.stderr();
    await new Promise((r) => setTimeout(r, 500));
    result = readJson(join(folder, 'result.json'));
  }, 150_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('the second daemon found the unfinished run on the same port and finished it at the cutoff', () => {
    expect(exitCode, output).toBe(0);
    expect(output).toMatch(/Resuming an interrupted run/);
    expect(result.end_reason).toBe('cutoff');
    const events = readFileSync(join(folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { event: string });
    expect(events.map((e) => e.event)).toEqual(
      expect.arrayContaining([
        'run_started',
        'resumed',
        'unlogged_discharge',
        'precheck_passed',
        'run_ended',
      ]),
    );
  });

  it('the rig saw: on by the host, off by its watchdog, on again after a new precheck, off at the cutoff', () => {
    expect(rig.readTruth().load_log.map((s) => [s.on, s.cause])).toEqual([
      [true, 'host'],
      [false, 'watchdog'],
      [true, 'host'],
      [false, 'host'],
    ]);
  });

  it('every row logged before the kill is in the log exactly once, in place', () => {
    const after = sampleRows(folder);
    expect(before.length).toBeGreaterThan(50);
    // A row cut in half by the kill is dropped; every whole one stays where it was.
    const whole = before.filter((r) => r.split(',').length === 16);
    expect(after.slice(0, whole.length)).toEqual(whole);
    expect(new Set(after).size).toBe(after.length);
    expect(result.frames_accepted).toBe(after.length);
  });

  it('the frames the rig sent while the daemon was down are counted as lost: the sequence step across the resume (the quick rig drops none)', () => {
    const whole = before.filter((r) => r.split(',').length === 16);
    const after = sampleRows(folder);
    const seqOf = (row: string): number => Number(row.split(',')[3]);
    const step = seqOf(after[whole.length]!) - seqOf(whole.at(-1)!);
    // 6.5 s at 10 frames a second at the least, plus the second daemon's start.
    expect(step).toBeGreaterThan(65);
    expect(result.frames_lost).toBe(step - 1);
  });

  it('the capacity equals the charge the cell really gave within one second of samples (charge = ∫ I dt, physics)', () => {
    const truth = rig.readTruth().truth;
    const meanA = truth.chargeAh / (truth.loadOnS / 3600);
    const oneSecondAh = meanA / 3600;
    expect(Math.abs(result.capacity_Ah - truth.chargeAh)).toBeLessThan(oneSecondAh);
  });
});
