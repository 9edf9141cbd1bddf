/**
 * Filing a finished run into the registry: the hook called after a run's result.json is
 * written, and the idempotent filing a fleet process shares. The run folder is written first and
 * stays the record; a registry that is locked, full or damaged only delays the filing, which
 * `cellvigil cells rebuild` makes up later.
 */
import { setTimeout as sleep } from 'node:timers/promises';
import { CellvigilError } from '../core/errors.js';
import { Registry } from './registry-db.js';
import type { RunRecord } from './run-record.js';
import { readRunForRegistry } from './run-source.js';

export type FileOutcome =
  | { status: 'filed'; cell_id: string; run_key: string }
  | { status: 'skipped'; reason: string }
  | { status: 'failed'; code: string; message: string };

export interface FileRunOptions {
  /** Tries while the registry is locked by another process. @default 5 */
  attempts?: number;
  /** Wait between tries, ms (async: the caller's event loop keeps running). @default 400 */
  retryMs?: number;
  /** How long one try waits for the lock, ms (blocking: kept short). @default 100 */
  busyTimeoutMs?: number;
}

/**
 * Files one record (idempotent: the same run filed again, by cell id and start time, replaces
 * its row), retrying while another process holds the lock. Never throws.
 */
export async function fileRecord(
  registryPath: string,
  record: RunRecord,
  options: FileRunOptions = {},
): Promise<FileOutcome> {
  const attempts = options.attempts ?? 5;
  let last: CellvigilError | null = null;
  for (let i = 0; i < attempts; i++) {
    if (i > 0) await sleep(options.retryMs ?? 400);
    let registry: Registry | null = null;
    try {
      registry = Registry.open(registryPath, { busyTimeoutMs: options.busyTimeoutMs ?? 100 });
      registry.fileRuns([record]);
      return { status: 'filed', cell_id: record.cell_id, run_key: record.run_key };
    } catch (e) {
      last =
        e instanceof CellvigilError
          ? e
          : new CellvigilError('CV_REGISTRY_WRITE', (e as Error).message ?? String(e));
      if (last.code !== 'CV_REGISTRY_LOCKED') break;
    } finally {
      try {
        registry?.close();
      } catch {
        // Closing a connection whose disk went away must not turn a report into a throw.
      }
    }
  }
  return {
    status: 'failed',
    code: last?.code ?? 'CV_REGISTRY_WRITE',
    message: last?.message ?? '',
  };
}

/** The daemon's hook: reads the run folder's result and files it. Never throws. */
export async function fileRunResult(
  registryPath: string,
  runFolder: string,
  options: FileRunOptions = {},
): Promise<FileOutcome> {
  const read = await readRunForRegistry(runFolder);
  switch (read.kind) {
    case 'record':
      return fileRecord(registryPath, read.record, options);
    case 'unfinished':
      return { status: 'skipped', reason: `${runFolder} has no result.json yet` };
    case 'skipped':
      return { status: 'skipped', reason: `${runFolder}: ${read.reason}` };
    case 'damaged':
      return { status: 'failed', code: 'CV_RUN_DATA', message: read.message };
  }
}

/** One line for a log or an event: what happened to the filing. */
export function describeFiling(o: FileOutcome, registryPath: string): string {
  switch (o.status) {
    case 'filed':
      return `filed in the registry ${registryPath} under cell ${o.cell_id}`;
    case 'skipped':
      return `not filed in the registry: ${o.reason}`;
    case 'failed':
      return `not filed in the registry (${o.code}): ${o.message}; the run folder keeps the result, and \`cellvigil cells rebuild\` files it later`;
  }
}

/**
 * A run's end, as a daemon or a station sees it once result.json is written: a run with a cell
 * id is filed, and what happened is printed (filed, skipped and why, or failed and why). A run
 * without a cell id has nothing to be filed under and is left alone, silently. Never throws.
 */
export async function fileAtRunEnd(
  registryPath: string,
  runFolder: string,
  cellId: unknown,
  print: (line: string) => void,
  options: FileRunOptions = {},
): Promise<FileOutcome | null> {
  if (typeof cellId !== 'string' || cellId === '') return null;
  const outcome = await fileRunResult(registryPath, runFolder, options);
  print(describeFiling(outcome, registryPath));
  return outcome;
}
