/**
 * The controls of a channel's run from outside the rig: a calibration or chemistry file edited
 * mid-run (validated first; a rejected one leaves what is in force), and SIGINT/SIGTERM.
 */
import { loadCalibration } from '../calibration/calibration-file.js';
import { findChemistry } from '../chemistry/chemistries.js';
import { loadChemistries } from '../chemistry/chemistry-file.js';
import type { ChannelRun } from './channel-run.js';
import { watchFile } from './file-watch.js';
import type { StatusPrinter } from './status-line.js';

export interface Watcher {
  close(): Promise<void>;
}

/**
 * A cutoff change (whole string, V) from outside the rig, printed and logged with who made it,
 * whether it applies or is refused.
 */
export function changeCutoff(
  run: ChannelRun,
  status: StatusPrinter,
  x: { volts: number; by: string; cells: number },
): { ok: true } | { ok: false; error: string } {
  const before = run.session.cutoffV;
  const r = run.setCutoff(x.volts, x.by);
  const perCell = (v: number): string => `${(v / x.cells).toFixed(3)} V per cell`;
  if (r.ok)
    status.line(
      `Cutoff changed by ${x.by}: ${before.toFixed(3)} V -> ${run.session.cutoffV.toFixed(3)} V (${perCell(run.session.cutoffV)}).`,
    );
  else status.line(`Cutoff change to ${x.volts.toFixed(3)} V by ${x.by} refused: ${r.error}`);
  return r;
}

/** A calibration file rewritten mid-run applies from the next sample, if it validates. */
export async function reloadCalibration(
  run: ChannelRun,
  status: StatusPrinter,
  path: string,
): Promise<void> {
  if (run.isEnded) return;
  try {
    const next = await loadCalibration(path);
    const changed = run.useCalibration(next, path);
    if (changed)
      status.line(`Calibration ${next.id} applies from the next sample (was ${changed.old}).`);
  } catch (e) {
    if (run.isEnded) return;
    const message = (e as Error).message;
    const kept = run.pipeline.calibrationId;
    run.log({ event: 'calibration_rejected', file: path, error: message, kept_id: kept });
    status.line(`The edited calibration was rejected and ${kept} stays in force: ${message}`);
  }
}

/** A chemistry file edited mid-run: new floor, temperature limit and default cutoff, if it validates. */
export function reloadChemistry(
  run: ChannelRun,
  status: StatusPrinter,
  chemistryId: string,
  path: string,
): void {
  if (run.isEnded) return;
  try {
    const next = findChemistry(loadChemistries(path), chemistryId, path);
    const { floorV, cutoffV } = run.useChemistry(next);
    const maxC = next.max_temperature_C.value;
    run.log({
      event: 'chemistry_changed',
      file: path,
      chemistry: next.id,
      floor_V: floorV,
      cutoff_V: cutoffV,
      max_temperature_C: maxC,
    });
    status.line(
      `Chemistry profile reloaded: cutoff ${cutoffV.toFixed(3)} V, floor ${floorV.toFixed(3)} V, limit ${maxC} °C.`,
    );
  } catch (e) {
    const message = (e as Error).message;
    run.log({ event: 'chemistry_rejected', file: path, error: message });
    status.line(`The edited chemistry file was rejected; the limits in force stay: ${message}`);
  }
}

/** Watches the run's calibration file and (for a new run) the chemistry file. */
export function watchRunFiles(
  run: ChannelRun,
  status: StatusPrinter,
  files: { calibration: string | null; chemistries: string | null; chemistryId: string },
): Watcher[] {
  const watchers: Watcher[] = [];
  const { calibration, chemistries } = files;
  if (calibration !== null)
    watchers.push(watchFile(calibration, () => void reloadCalibration(run, status, calibration)));
  if (chemistries !== null)
    watchers.push(
      watchFile(chemistries, () => reloadChemistry(run, status, files.chemistryId, chemistries)),
    );
  return watchers;
}

/**
 * SIGINT and SIGTERM switch the load off and finish the run. The handlers stay until the
 * process exits: a signal while the result is written must not cut it short.
 */
export function handleSignals(run: ChannelRun, status: StatusPrinter): void {
  let requests = 0;
  const onSignal = (sig: NodeJS.Signals): void => {
    if (run.isEnded) {
      status.line(`${sig}: the run has ended; writing its files…`);
      return;
    }
    requests++;
    run.log({ event: 'signal', signal: sig });
    if (requests > 1)
      status.line(
        `${sig} again: the load is being switched off first; the run ends as soon as the rig confirms it.`,
      );
    else
      status.line(
        `${sig}: switching the load off and finishing the run; cellvigil exits once the result is written…`,
      );
    run.stop(sig);
  };
  process.on('SIGINT', onSignal);
  process.on('SIGTERM', onSignal);
}
