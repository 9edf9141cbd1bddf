/**
 * When a fit is refused after the points were taken on the rig, the captured points are saved
 * beside the calibration file that was not written, so that a mistyped reading can be mended
 * and fitted with `--from-points` instead of taking every point again.
 */
import { writeFile } from 'node:fs/promises';
import type { PointsByQuantity } from './file-points.js';
import { formatPointsFile } from './points-file.js';

/** The points file's path for a calibration file: `cal.json` -> `cal.points.yaml`. */
export function pointsPathFor(out: string): string {
  return `${out.replace(/\.json$/i, '')}.points.yaml`;
}

/** Writes the points; returns the line to print (saving must never hide the refusal itself). */
export async function savePointsAfterRefusal(
  out: string,
  points: PointsByQuantity,
  referenceInstrument: string | null,
): Promise<string> {
  const path = pointsPathFor(out);
  try {
    await writeFile(path, formatPointsFile(points, referenceInstrument), 'utf8');
    return `the captured points were saved to ${path}: mend the reading there, then fit them with --from-points ${path} (no rig needed)`;
  } catch (err) {
    return `the captured points could not be saved to ${path}: ${(err as Error).message}`;
  }
}
