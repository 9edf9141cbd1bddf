/**
 * `cellvigil report` as a programmatic core: recompute each run folder, write its result and
 * report without touching what the run wrote itself, and compare several runs on one page.
 *
 * File names (docs/report.md): result.json only for a run that has none (an interrupted run);
 * otherwise result-<calibration id>.json beside the original. report.html for a recompute with
 * the run's own calibration, report-<calibration id>.html with another one.
 */
import { writeFile } from 'node:fs/promises';
import { basename, join } from 'node:path';
import type { Calibration } from '../calibration/calibration.js';
import { loadCalibration } from '../calibration/calibration-file.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { openRunFolder, type RunFolder } from '../replay/run-folder.js';
import { writeResult } from '../record/result.js';
import { renderComparisonReport } from './html-compare.js';
import { renderRunReport } from './html.js';
import { checkRatedOption, ratedAgainstRun } from './rated-check.js';
import { recomputeRun, type RunFigures } from './recompute.js';

export interface ReportRequest {
  folders: string[];
  /** Another calibration file to apply instead of each run's own. */
  calibrationFile?: string;
  ratedAh?: number;
  stepPerCellV?: number;
  /** The report file: one run's report.html, or the comparison page of several. */
  out?: string;
  /** Progress through run `index` of `count`: sample bytes done and in all. */
  onProgress?: (index: number, count: number, doneBytes: number, totalBytes: number) => void;
  /** ISO time written in the pages. @default now */
  generatedAt?: string;
}

export interface ReportedRun {
  folder: string;
  resultPath: string;
  reportPath: string;
  figures: RunFigures;
}

export interface ReportOutcome {
  runs: ReportedRun[];
  comparisonPath: string | null;
}

/** Default name of the comparison page, in the current folder. */
export const COMPARISON_FILE = 'comparison.html';
export const MIN_STEP_V = 0.005;
export const MAX_STEP_V = 1;

export function resultFileName(run: RunFolder, calibrationId: string): string {
  return run.result === null ? 'result.json' : `result-${calibrationId}.json`;
}

export function reportFileName(figures: RunFigures): string {
  return figures.calibration.own ? 'report.html' : `report-${figures.calibration.id}.html`;
}

function checkRequest(r: ReportRequest): void {
  if (r.folders.length === 0)
    throw makeError(
      ErrorCodes.USAGE,
      'no run folder given',
      'cellvigil report',
      'Name one or more run folders, e.g. cellvigil report runs/20261202-110000-demo.',
    );
  if (r.ratedAh !== undefined) checkRatedOption(r.ratedAh);
  if (
    r.stepPerCellV !== undefined &&
    !(r.stepPerCellV >= MIN_STEP_V && r.stepPerCellV <= MAX_STEP_V)
  ) {
    throw makeError(
      ErrorCodes.USAGE,
      `step ${r.stepPerCellV} V is outside ${MIN_STEP_V} to ${MAX_STEP_V} V per cell`,
      '--step',
      'Give the voltage step per cell in volts, e.g. --step 0.05.',
    );
  }
}

function calibrationNotes(run: RunFolder, cal: Calibration | null): string[] {
  const rigName = run.manifest.rig.profile.name;
  if (!cal || rigName === undefined || cal.rig === rigName) return [];
  return [
    `The calibration ${cal.id} was made for the rig “${cal.rig}”; this run was recorded on “${rigName}”. Check that it is the same board.`,
  ];
}

export async function reportRuns(r: ReportRequest): Promise<ReportOutcome> {
  checkRequest(r);
  const calibration =
    r.calibrationFile !== undefined ? await loadCalibration(r.calibrationFile) : undefined;
  const generatedAt = r.generatedAt ?? new Date().toISOString();
  const runs: ReportedRun[] = [];
  for (const [i, folder] of r.folders.entries()) {
    const run = await openRunFolder(folder);
    if (calibration) run.notes.push(...calibrationNotes(run, calibration));
    const figures = await recomputeRun(run, {
      ...(calibration !== undefined ? { calibration, calibrationFile: r.calibrationFile! } : {}),
      ...(r.ratedAh !== undefined ? { ratedAh: r.ratedAh } : {}),
      ...(r.stepPerCellV !== undefined ? { stepPerCellV: r.stepPerCellV } : {}),
      ...(r.onProgress
        ? {
            onProgress: (done: number, total: number) =>
              r.onProgress!(i, r.folders.length, done, total),
          }
        : {}),
    });
    if (r.ratedAh !== undefined) {
      const slip = ratedAgainstRun(
        r.ratedAh,
        figures.result.capacity_Ah,
        figures.result.end_reason,
        folder,
      );
      if (slip) throw slip;
    }
    const resultName = resultFileName(run, figures.calibration.id);
    const resultPath = join(folder, resultName);
    const reportPath =
      r.out !== undefined && r.folders.length === 1 ? r.out : join(folder, reportFileName(figures));
    await write(resultPath, () => writeResult(resultPath, figures.result));
    await write(reportPath, () =>
      writeFile(reportPath, renderRunReport(figures, { generatedAt, resultFile: resultName })),
    );
    runs.push({ folder, resultPath, reportPath, figures });
  }
  let comparisonPath: string | null = null;
  if (runs.length > 1) {
    comparisonPath = r.out ?? COMPARISON_FILE;
    const path = comparisonPath;
    await write(path, () =>
      writeFile(
        path,
        renderComparisonReport(
          runs.map((x) => x.figures),
          { generatedAt },
        ),
      ),
    );
  }
  return { runs, comparisonPath };
}

async function write(path: string, fn: () => Promise<void>): Promise<void> {
  try {
    await fn();
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot write ${basename(path)}: ${(e as Error).message}`,
      path,
      'Check that the folder exists and is writable (or give another file with --out).',
    );
  }
}
