import { execFile } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { promisify } from 'node:util';
import { beforeAll, describe, expect, it } from 'vitest';
import type { Calibration } from '../../src/calibration/calibration.js';
import { startRun, type RunOutcome } from '../../src/run/daemon.js';
import type { SimSource } from '../../src/sources/sim-source.js';
import { CLI } from './pty-helpers.js';

const run = promisify(execFile);

async function discharge(
  runs: string,
  calibration?: string,
): Promise<{ outcome: RunOutcome; truthAh: number }> {
  const out = new PassThrough();
  out.resume();
  const handle = await startRun(
    {
      sim: 'demo',
      speed: 400,
      runs,
      listen: null,
      once: true,
      rotateBytes: 1 << 24,
      channel: 0,
      linkTimeoutS: 60,
      ...(calibration ? { calibration } : {}),
    },
    { out, err: out },
  );
  const outcome = await handle.done;
  return { outcome, truthAh: (handle.source as SimSource).rig.truth().chargeAh };
}

// The documented path: capture points on the board, type the meter's readings (here the
// simulator's truth with a realistic meter error added, inside the meter's stated accuracy),
// fit, then discharge with the calibration.
describe('calibrating a board with a 30 mA offset and a 4 % gain error, then discharging', () => {
  let calibrated: { outcome: RunOutcome; truthAh: number };
  let uncalibrated: { outcome: RunOutcome; truthAh: number };

  beforeAll(async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cv-calrun-'));
    writeFileSync(
      join(dir, 'capture.yaml'),
      [
        'reference_instrument: simulated bench meter',
        'points:',
        '  - { quantity: current, load: off, reference: truth }',
        '  - { quantity: current, load: on, reference: truth }',
        '  - { quantity: voltage, load: off, reference: truth }',
        '  - { quantity: voltage, load: on, reference: truth }',
      ].join('\n'),
    );
    await run(process.execPath, [
      CLI,
      'calibrate',
      '--sim',
      'demo',
      '--speed',
      '20',
      '--points',
      join(dir, 'capture.yaml'),
      '--out',
      join(dir, 'captured.json'),
    ]);
    const captured = JSON.parse(readFileSync(join(dir, 'captured.json'), 'utf8')) as Calibration;
    // What a person would have typed from a meter of ±(0.5 % + 3 mA) and ±(0.05 % + 2 mV):
    // readings off by +0.2 % + 1 mA and +0.03 %, well inside those limits.
    const typed = [
      ...captured.current!.points.map((p) => ({
        quantity: 'current',
        raw_mean: p.raw_mean,
        raw_sd: p.raw_sd ?? 0,
        samples: p.samples ?? 1,
        reference: p.reference * 1.002 + 0.001,
        accuracy: '0.5%+0.003',
      })),
      ...captured.voltage!.points.map((p) => ({
        quantity: 'voltage',
        raw_mean: p.raw_mean,
        raw_sd: p.raw_sd ?? 0,
        samples: p.samples ?? 1,
        reference: p.reference * 1.0003,
        accuracy: '0.05%+0.002',
      })),
    ];
    writeFileSync(
      join(dir, 'typed.json'),
      JSON.stringify({ reference_instrument: 'bench meter, 10 A range', points: typed }),
    );
    await run(process.execPath, [
      CLI,
      'calibrate',
      '--from-points',
      join(dir, 'typed.json'),
      '--out',
      join(dir, 'board.json'),
    ]);
    [calibrated, uncalibrated] = await Promise.all([
      discharge(join(dir, 'runs-a'), join(dir, 'board.json')),
      discharge(join(dir, 'runs-b')),
    ]);
  }, 180_000);

  it('uncalibrated, the capacity is off by several percent', () => {
    const err =
      (uncalibrated.outcome.result.capacity_Ah - uncalibrated.truthAh) / uncalibrated.truthAh;
    expect(Math.abs(err)).toBeGreaterThan(0.03);
  });

  it("calibrated, it is within 0.5 % of the simulator's truth (charge = ∫ I dt, physics)", () => {
    const err = (calibrated.outcome.result.capacity_Ah - calibrated.truthAh) / calibrated.truthAh;
    expect(Math.abs(err)).toBeLessThan(0.005);
    expect(calibrated.outcome.result.calibration_id).toMatch(/^[0-9a-f]{16}$/);
  });

  it('the stated expanded uncertainty (k = 2, GUM) covers the true error', () => {
    for (const r of [calibrated, uncalibrated]) {
      const err = Math.abs(r.outcome.result.capacity_Ah - r.truthAh);
      expect(err).toBeLessThan(r.outcome.result.uncertainty.capacity_Ah.expanded);
    }
  });
});
