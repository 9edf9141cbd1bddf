/**
 * A calibration of one channel of the emulated rig, made the documented way: `cellvigil
 * calibrate` averages the rig's counts at each point, then the readings a perfect meter would
 * have shown (the harness's own truth over the same stretch of time) are put in and fitted
 * with `calibrate --from-points`.
 */
import { execFile } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { promisify } from 'node:util';
import type { Calibration, CalibrationPoint } from '../../src/calibration/calibration.js';
import { CLI } from '../e2e/pty-helpers.js';
import { RIG_PROFILE, startEmulatedRig, type Segment } from './emulated-rig.js';

const run = promisify(execFile);

// Rest points first (all in the first stretch with the load off, where nothing changes), then
// one loaded point per quantity: the k-th loaded point is the k-th stretch with the load on.
const CAPTURE = `reference_instrument: placeholder readings, replaced by the emulated rig's truth
points:
  - { quantity: current, load: off, reference: 0, u: 0 }
  - { quantity: voltage, load: off, reference: 3.9, u: 0.001 }
  - { quantity: temperature, reference: 25, u: 0.1 }
  - { quantity: current, load: on, reference: 1.6, u: 0.001 }
  - { quantity: voltage, load: on, reference: 3.7, u: 0.001 }
`;

export interface TruthCalibration {
  file: string;
  calibration: Calibration;
  /** The fitted values against the truth: the harness's mean current of the loaded point. */
  loadedTruthA: number;
}

/** `seconds`: how long each point is averaged. */
export async function calibrateFromTruth(
  channel: number,
  seed: number,
  seconds = 10,
): Promise<TruthCalibration> {
  // A large cell: its current hardly moves during a point's few seconds.
  const rig = await startEmulatedRig({ capacityMah: 2000, soc: 0.6, seed });
  try {
    writeFileSync(join(rig.dir, 'capture.yaml'), CAPTURE);
    const captured = join(rig.dir, 'captured.json');
    await run(process.execPath, [
      CLI,
      'calibrate',
      '--port',
      rig.port,
      '--rig',
      RIG_PROFILE,
      '--channel',
      String(channel),
      '--chemistry',
      'li-ion',
      '--points',
      join(rig.dir, 'capture.yaml'),
      // 100 frames a point: with 30, the mean count of a loaded point is known to only about
      // 0.01 % of its reading, as much as everything else a one-minute discharge is uncertain by.
      '--seconds',
      String(seconds),
      '--settle',
      '0.5',
      '--out',
      captured,
    ]);
    const segs = rig.truth().channels[channel as 0 | 1].segments;
    const rest = segs[0]!;
    const loaded = segs.filter((s: Segment) => s.load);
    if (rest.load || loaded.length !== 2)
      throw new Error(`unexpected load pattern: ${JSON.stringify(segs)}`);
    const cal = JSON.parse(readFileSync(captured, 'utf8')) as Calibration;
    const typed = (quantity: string, points: CalibrationPoint[], truths: number[]): object[] =>
      points.map((p, k) => ({
        quantity,
        raw_mean: p.raw_mean,
        raw_sd: p.raw_sd ?? 0,
        samples: p.samples ?? 1,
        reference: truths[k],
        u: truths[k] === 0 ? 0 : 0.0001,
      }));
    const points = [
      ...typed('current', cal.current!.points, [0, loaded[0]!.mean_A]),
      ...typed('voltage', cal.voltage!.points, [rest.mean_V, loaded[1]!.mean_V]),
      ...typed('temperature', cal.temperature!.points, [rest.mean_C]),
    ];
    const truthFile = join(rig.dir, 'truth-points.json');
    writeFileSync(
      truthFile,
      JSON.stringify({ reference_instrument: "the emulated rig's truth", points }),
    );
    const file = join(rig.dir, `cal-ch${channel}.json`);
    await run(process.execPath, [
      CLI,
      'calibrate',
      '--from-points',
      truthFile,
      '--rig',
      RIG_PROFILE,
      '--out',
      file,
    ]);
    return {
      file,
      calibration: JSON.parse(readFileSync(file, 'utf8')) as Calibration,
      loadedTruthA: loaded[0]!.mean_A,
    };
  } finally {
    await rig.stop();
  }
}
