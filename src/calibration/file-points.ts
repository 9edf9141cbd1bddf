/**
 * Points from a points file: checked before anything is switched, then either captured on the
 * rig one after the other (--points) or taken as already captured (--from-points).
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { UNITS, type CalibrationPoint, type Quantity } from './calibration.js';
import type { WindowResult } from './capture.js';
import { formatPoint } from './fit-report.js';
import { givenStats, toCalibrationPoint } from './nominal-point.js';
import type { PointRequest } from './point-capture.js';
import type { PointSpec, PointsFile } from './points-file.js';
import { minPoints, QUANTITIES } from './quantity-fit.js';

export type PointsByQuantity = Partial<Record<Quantity, CalibrationPoint[]>>;
export type CapturePoint = (req: PointRequest) => Promise<WindowResult>;

export type PointsMode = 'capture' | 'given';

/**
 * Everything about a points file that can be refused before the rig is touched: too few
 * points, the same reading twice, truth outside the simulator, raw means in the wrong mode.
 */
export function checkPointsPlan(file: PointsFile, mode: PointsMode, simulated: boolean): void {
  for (const p of file.points) {
    const where = `${file.file}, point ${p.index} (${p.quantity})`;
    if (p.reference === 'truth' && (!simulated || mode === 'given')) {
      throw makeError(
        ErrorCodes.USAGE,
        'reference "truth" is the simulator\'s own value and exists only when capturing from --sim',
        where,
        "Type the reference meter's reading instead, with its accuracy.",
      );
    }
    if (mode === 'given' && !p.raw) {
      throw makeError(
        ErrorCodes.USAGE,
        'the point has no raw_mean to fit from',
        where,
        'Give raw_mean (the mean ADC count) for every point, or capture with --points and a rig.',
      );
    }
    if (mode === 'capture' && p.raw) {
      throw makeError(
        ErrorCodes.USAGE,
        'the point already has a raw_mean, which is for --from-points',
        where,
        'Remove raw_mean to capture the point on the rig, or use --from-points to fit without a rig.',
      );
    }
  }
  for (const q of QUANTITIES) {
    const pts = file.points.filter((p) => p.quantity === q);
    if (pts.length === 0) continue;
    const where = `${file.file}, ${q} points`;
    if (pts.length < minPoints(q)) {
      throw makeError(
        ErrorCodes.CALIBRATION_FIT,
        `a ${q} calibration needs at least ${minPoints(q)} points, the file gives ${pts.length}`,
        where,
        q === 'current'
          ? 'Add a point with the load off (reference 0, u 0) and one with the load on; three or more are recommended.'
          : `Add a point at a clearly different ${q}; three or more are recommended.`,
      );
    }
    const numeric = pts.map((p) => p.reference).filter((r): r is number => r !== 'truth');
    if (
      minPoints(q) === 2 &&
      numeric.length === pts.length &&
      numeric.every((r) => r === numeric[0])
    ) {
      throw makeError(
        ErrorCodes.CALIBRATION_FIT,
        `every ${q} point has the same reference reading (${numeric[0]} ${UNITS[q]}), so no gain can be found`,
        where,
        `Give each point the reading taken at it, at clearly different ${q}s.`,
      );
    }
  }
}

/** Captures each point of the file in order and pairs it with its reference. */
export async function captureFilePoints(
  specs: readonly PointSpec[],
  capture: CapturePoint,
  chain: AnalogChain,
  defaultWindowMs: number,
  print: (line: string) => void,
): Promise<PointsByQuantity> {
  const out: PointsByQuantity = {};
  for (const spec of specs) {
    const loadOn = spec.load ?? false;
    const label = `point ${spec.index} (${spec.quantity}, load ${loadOn ? 'on' : 'off'})`;
    const w = await capture({
      loadOn,
      windowMs: spec.seconds !== undefined ? spec.seconds * 1000 : defaultWindowMs,
      label,
    });
    let reference: number;
    if (spec.reference !== 'truth') reference = spec.reference;
    else if (w.truth) reference = w.truth[spec.quantity];
    else
      throw makeError(
        ErrorCodes.USAGE,
        'this rig has no true values to give',
        label,
        'Use "truth" only with --sim; type the meter\'s reading otherwise.',
      );
    const point = toCalibrationPoint(
      chain,
      spec.quantity,
      w[spec.quantity],
      reference,
      spec.referenceU,
      label,
    );
    print(formatPoint(label, spec.quantity, point));
    (out[spec.quantity] ??= []).push(point);
  }
  return out;
}

/** Points whose raw means were captured before: only the chain's nominal values are added. */
export function givenFilePoints(specs: readonly PointSpec[], chain: AnalogChain): PointsByQuantity {
  const out: PointsByQuantity = {};
  for (const spec of specs) {
    const raw = spec.raw!;
    const label = `point ${spec.index} (${spec.quantity})`;
    const p = toCalibrationPoint(
      chain,
      spec.quantity,
      givenStats(raw),
      spec.reference as number,
      spec.referenceU,
      label,
    );
    // Keep only the spread that was recorded; none is invented.
    if (raw.sd === undefined) delete p.raw_sd;
    if (raw.samples === undefined) delete p.samples;
    (out[spec.quantity] ??= []).push(p);
  }
  return out;
}
