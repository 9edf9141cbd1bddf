/** `cellvigil assess` as a function: check the options, read the files, build the report. */
import { resolve } from 'node:path';
import { loadCalibration } from '../calibration/calibration-file.js';
import { loadRigProfile } from '../chain/rig-profile-file.js';
import { findChemistry } from '../chemistry/chemistries.js';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../chemistry/chemistry-file.js';
import { validateCells } from '../chemistry/limits.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { assess, type AssessReport } from './assess.js';
import { formatAssess } from './format.js';

export interface AssessOptions {
  rig: string;
  currentA?: number;
  hours?: number;
  calibration?: string;
  referenceAccuracy?: string;
  claimResolutionA?: number;
  /** Percent. */
  rigClockTolerancePct?: number;
  temperatures?: number[];
  /** The battery to be tested (chemistry id), with its cells in series. */
  chemistry?: string;
  cells?: number;
  chemistriesFile?: string;
}

function usage(what: string, where: string, fix: string): Error {
  return makeError(ErrorCodes.USAGE, what, where, fix);
}

function positive(x: number | undefined, where: string, fix: string): void {
  if (x !== undefined && !(x > 0 && Number.isFinite(x)))
    throw usage(`${String(x)} is not a positive number`, where, fix);
}

/** The test a capacity budget is for, after checking the options that state it. */
function budgetTest(o: AssessOptions): { currentA: number; hours: number } | undefined {
  positive(o.currentA, '--current', 'Give the test current in amps, e.g. 0.5.');
  positive(o.hours, '--hours', 'Give the test duration in hours, e.g. 5.');
  positive(
    o.claimResolutionA,
    '--claim-resolution',
    'Give the claimed current resolution in amps, e.g. 0.001.',
  );
  if ((o.currentA === undefined) !== (o.hours === undefined)) {
    throw usage(
      'a capacity budget needs both the current and the duration',
      o.currentA === undefined ? '--current' : '--hours',
      'Give --current <A> and --hours <h> together.',
    );
  }
  const test =
    o.currentA !== undefined && o.hours !== undefined
      ? { currentA: o.currentA, hours: o.hours }
      : undefined;
  if (
    !test &&
    (o.calibration !== undefined ||
      o.referenceAccuracy !== undefined ||
      o.rigClockTolerancePct !== undefined)
  ) {
    throw usage(
      '--calibration, --reference-accuracy and --rig-clock-tolerance belong to a capacity budget',
      '--current / --hours',
      'Add --current <A> --hours <h> to state the test.',
    );
  }
  if (o.calibration !== undefined && o.referenceAccuracy !== undefined) {
    throw usage(
      'give either a calibration file or a reference accuracy, not both',
      '--reference-accuracy',
      "The calibration file already carries its reference meter's uncertainty; --reference-accuracy is for a calibration still to be taken.",
    );
  }
  return test;
}

/** The other options' ranges. */
function checkRanges(o: AssessOptions): void {
  const tol = o.rigClockTolerancePct;
  if (tol !== undefined && !(tol >= 0 && tol < 100))
    throw usage(
      `${tol} % is not a clock tolerance`,
      '--rig-clock-tolerance',
      'Give the oscillator tolerance in percent, e.g. 3.',
    );
  for (const t of o.temperatures ?? []) {
    if (!(t > -55 && t < 150))
      throw usage(
        `${t} °C is outside a thermistor's range`,
        '--temperatures',
        'Give temperatures between −55 and 150 °C, e.g. 0 25 45 60.',
      );
  }
  if (o.cells !== undefined && o.chemistry === undefined)
    throw usage(
      '--cells without --chemistry',
      '--chemistry',
      'Name the chemistry too, e.g. --chemistry lead-acid --cells 6.',
    );
}

export async function runAssess(o: AssessOptions): Promise<{ report: AssessReport; text: string }> {
  const test = budgetTest(o);
  checkRanges(o);
  const tol = o.rigClockTolerancePct;
  const battery =
    o.chemistry !== undefined
      ? {
          chemistry: findChemistry(
            loadChemistries(o.chemistriesFile ?? DEFAULT_CHEMISTRIES_PATH),
            o.chemistry,
          ),
          cells: validateCells(o.cells ?? 1),
        }
      : undefined;
  const rigFile = resolve(o.rig);
  const profile = await loadRigProfile(rigFile);
  const calibration =
    o.calibration !== undefined ? await loadCalibration(resolve(o.calibration)) : null;
  const report = assess({
    rigFile: o.rig,
    profile,
    calibration,
    ...(test ? { test } : {}),
    ...(o.temperatures && o.temperatures.length > 0 ? { temperatures: o.temperatures } : {}),
    ...(o.referenceAccuracy !== undefined ? { referenceAccuracy: o.referenceAccuracy } : {}),
    ...(o.claimResolutionA !== undefined ? { claimResolutionA: o.claimResolutionA } : {}),
    ...(tol !== undefined ? { rigClockTolerance: tol / 100 } : {}),
    ...(battery ? { battery } : {}),
  });
  return { report, text: formatAssess(report) };
}
