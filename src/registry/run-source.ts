/**
 * The one place the registry reads a run folder: its result.json, and its manifest.json when the
 * result does not carry the cell id. Everything else in the registry sees only the outcome.
 */
import { basename, join } from 'node:path';
import { CellvigilError } from '../core/errors.js';
import { readOptional } from '../record/json-file.js';
import { MANIFEST_FILE, parseManifest } from '../record/manifest.js';
import { readResultFile, resultPath } from '../record/result.js';
import { recordFromResult, type ResultFigures, type RunRecord } from './run-record.js';

export type RunSourceOutcome =
  | { kind: 'record'; record: RunRecord }
  /** The run has no result.json: it never finished (or is still going). */
  | { kind: 'unfinished' }
  /** The run carries no cell id (or no start time): nothing to file it under. */
  | { kind: 'skipped'; reason: string }
  /** A file is unreadable or does not validate; the message says which and why. */
  | { kind: 'damaged'; message: string };

async function manifestKeys(
  dir: string,
): Promise<{ cell_id?: string; started_wall?: string } | null> {
  const path = join(dir, MANIFEST_FILE);
  const text = await readOptional(path);
  if (text === null) return null;
  const manifest = parseManifest(text, path) as { cell_id?: unknown; started_wall: string };
  return typeof manifest.cell_id === 'string'
    ? { cell_id: manifest.cell_id, started_wall: manifest.started_wall }
    : { started_wall: manifest.started_wall };
}

/** Reads one run folder for the registry; never throws. */
export async function readRunForRegistry(dir: string): Promise<RunSourceOutcome> {
  try {
    const result = (await readResultFile(resultPath(dir))) as ResultFigures | null;
    if (result === null) return { kind: 'unfinished' };
    const manifest =
      typeof result.cell_id === 'string' && typeof result.started_wall === 'string'
        ? null
        : await manifestKeys(dir);
    const record = recordFromResult(result, basename(dir), manifest);
    if (record === 'no_cell_id')
      return { kind: 'skipped', reason: 'no cell id in result.json or manifest.json' };
    if (record === 'no_start_time')
      return { kind: 'skipped', reason: 'no valid started_wall in result.json or manifest.json' };
    return { kind: 'record', record };
  } catch (e) {
    return {
      kind: 'damaged',
      message: e instanceof CellvigilError ? e.message : `${(e as Error).message ?? String(e)}`,
    };
  }
}
