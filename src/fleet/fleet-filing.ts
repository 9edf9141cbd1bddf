/**
 * The fleet view's registry: every result it sees on the broker filed into one cell registry,
 * so one registry covers the benches of a lab. Filing is idempotent (a run is known by its cell
 * id and start time), so a result seen again after a restart of the view or the broker replaces
 * its own row. Results are filed one after another, never blocking the view.
 */
import { parseResult } from '../record/result.js';
import { describeFiling, fileRecord, type FileOutcome } from '../registry/file-run.js';
import { recordFromResult, type ResultFigures } from '../registry/run-record.js';
import type { ResultFiler } from './fleet-view.js';
import type { FleetResult } from './payloads.js';

/** One result from the broker into the registry; never throws. */
export async function fileFleetResult(registryPath: string, r: FleetResult): Promise<FileOutcome> {
  const where = `the result of ${r.run_id} from station ${r.station}, channel ${r.channel}`;
  let result: ResultFigures;
  try {
    result = parseResult(JSON.stringify(r.result), where) as ResultFigures;
  } catch (e) {
    return { status: 'failed', code: 'CV_RUN_DATA', message: (e as Error).message };
  }
  // The run folder is on the station's machine; its name is the run id.
  const record = recordFromResult(result, r.run_id, null);
  if (record === 'no_cell_id') return { status: 'skipped', reason: `${where} carries no cell id` };
  if (record === 'no_start_time')
    return { status: 'skipped', reason: `${where} carries no valid started_wall` };
  return fileRecord(registryPath, record);
}

/** The fleet view's `fileResult`: files in order, and says what happened to each. */
export function registryFiler(
  registryPath: string,
  print: (line: string) => void,
): ResultFiler & { idle(): Promise<void> } {
  let chain: Promise<void> = Promise.resolve();
  const filer = (r: FleetResult): void => {
    chain = chain.then(async () => {
      const o = await fileFleetResult(registryPath, r);
      print(`${r.station} ch ${r.channel} ${r.run_id}: ${describeFiling(o, registryPath)}`);
    });
  };
  return Object.assign(filer, { idle: () => chain });
}
