/**
 * `report --rated` is the cell's rated capacity in Ah. The usual slip is the label's mAh figure
 * (2600 for 2.6 Ah), which would make every share of the rating, C-rate and standard-style
 * check wrong by a factor of 1000.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { meaningful } from '../core/meaningful.js';
import { unitSlip } from '../core/unit-slip.js';

/** Rated capacities a cell on a discharge rig can have, Ah (a coin cell to a large prismatic cell). */
export const RATED_RANGE = { unit: 'Ah', min: 0.001, max: 1000, what: "a cell's rated capacity" };

const FIX = 'Give the capacity printed on the cell in Ah, e.g. --rated 2.6 for 2600 mAh.';

/** Refuses a rating outside RATED_RANGE, naming the likely slip. */
export function checkRatedOption(ratedAh: number): void {
  if (!(Number.isFinite(ratedAh) && ratedAh > 0))
    throw makeError(
      ErrorCodes.USAGE,
      `rated capacity ${ratedAh} is not a positive number of Ah`,
      '--rated',
      FIX,
    );
  const slip = unitSlip(ratedAh, RATED_RANGE);
  if (slip) throw makeError(ErrorCodes.USAGE, slip, '--rated', FIX);
}

/**
 * Against a run that went down to its cutoff: a rating about 1000 times the capacity the cell
 * gave was almost surely typed in mAh. Returns the refusal, or null.
 */
export function ratedAgainstRun(
  ratedAh: number,
  measuredAh: number,
  endReason: string,
  folder: string,
): Error | null {
  if (endReason !== 'cutoff' || !(measuredAh > 0)) return null;
  const asAh = ratedAh / 1000;
  if (!(asAh / measuredAh >= 0.3 && asAh / measuredAh <= 3)) return null;
  return makeError(
    ErrorCodes.USAGE,
    `the rated capacity ${meaningful(ratedAh)} Ah is about 1000 times what the cell gave down to its cutoff (${meaningful(measuredAh, 3)} Ah in ${folder}); did you mean ${meaningful(asAh)} Ah? ${meaningful(ratedAh)} looks like mAh`,
    '--rated',
    FIX,
  );
}
