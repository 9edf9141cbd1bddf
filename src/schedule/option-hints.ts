/**
 * Clearer refusals for the two slips of `--schedule` that the clause parser alone would word
 * wrongly: a file name that does not exist (read as a clause), and a duration without a unit.
 */
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';

/** A `--schedule` value that names a file rather than spelling a schedule out. */
export function looksLikeFileName(text: string): boolean {
  const t = text.trim();
  return !t.includes(',') && (/\.(ya?ml|json|txt)$/i.test(t) || /[/\\]/.test(t));
}

/** The refusal for a `--schedule` value that names a file that is not there. */
export function missingScheduleFile(text: string, where: string): CellvigilError {
  return makeError(
    ErrorCodes.CONFIG_READ,
    `there is no schedule file "${text.trim()}" (a schedule is either an existing file or clauses written out)`,
    where,
    'Check the path and the folder it is relative to, or write the schedule inline, e.g. --schedule "on 15 s every 1 min, 8 h per day, to 1.0 V".',
  );
}

/** What is wrong with a duration that could not be read, and how to write it. */
export function durationProblem(
  value: string | number,
  key: string,
): { what: string; fix: string } {
  if (typeof value === 'number')
    return {
      what: `${key} must be a positive duration, got ${value}`,
      fix: 'Give a positive number of seconds, or write it with a unit, e.g. "15 s", "1 min" or "4 h".',
    };
  const bare = /^\s*(\d+(?:\.\d+)?|\.\d+)\s*$/.exec(value);
  if (bare)
    return {
      what: `${key} "${value.trim()}" has no unit`,
      fix: `Write the unit with it, e.g. "${bare[1]} s" or "${bare[1]} min"; in a schedule written inline every duration needs one.`,
    };
  return {
    what: `${key} must be a positive duration, got "${value}"`,
    fix: 'Write it as a number and a unit, e.g. "15 s", "1 min" or "4 h".',
  };
}
