/**
 * Rebuilding the registry's runs from folders of run folders: every run folder is read, every
 * damaged or unfinished one is reported (never fatal), and the runs are replaced in one
 * transaction. Registered cells stay.
 */
import { readdir } from 'node:fs/promises';
import { join } from 'node:path';
import { ErrorCodes, makeError } from '../core/errors.js';
import { Registry } from './registry-db.js';
import type { RunRecord } from './run-record.js';
import { readRunForRegistry } from './run-source.js';

export interface RebuildReport {
  folders: number;
  filed: number;
  unfinished: string[];
  skipped: Array<{ folder: string; reason: string }>;
  damaged: Array<{ folder: string; message: string }>;
  /** Folders holding a run already read from another folder (same cell and start): filed once. */
  duplicates: string[];
  /** Cell ids with runs but no registration (their runs are filed; lists do not show them). */
  unregistered: string[];
}

export interface RebuildOptions {
  /** Run folders read at once. @default 16 */
  concurrency?: number;
  onProgress?: (done: number, total: number) => void;
}

async function listRunFolders(runsDir: string): Promise<string[]> {
  try {
    const entries = await readdir(runsDir, { withFileTypes: true });
    return entries
      .filter((e) => e.isDirectory())
      .map((e) => join(runsDir, e.name))
      .sort();
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot read the folder of runs: ${(e as Error).message}`,
      runsDir,
      'Give the folder that holds the run folders (the --runs of `cellvigil run`).',
    );
  }
}

/** Reads every run folder under `runsDirs` (bounded concurrency), in name order. */
export async function collectRuns(
  runsDirs: readonly string[],
  options: RebuildOptions = {},
): Promise<{ records: RunRecord[]; report: Omit<RebuildReport, 'unregistered'> }> {
  const folders = (await Promise.all(runsDirs.map(listRunFolders))).flat();
  const outcomes = new Array<Awaited<ReturnType<typeof readRunForRegistry>>>(folders.length);
  let next = 0;
  let done = 0;
  const worker = async (): Promise<void> => {
    while (next < folders.length) {
      const i = next++;
      outcomes[i] = await readRunForRegistry(folders[i]!);
      options.onProgress?.(++done, folders.length);
    }
  };
  await Promise.all(Array.from({ length: options.concurrency ?? 16 }, worker));
  const report: Omit<RebuildReport, 'unregistered'> = {
    folders: folders.length,
    filed: 0,
    unfinished: [],
    skipped: [],
    damaged: [],
    duplicates: [],
  };
  const byKey = new Map<string, RunRecord>();
  folders.forEach((folder, i) => {
    const o = outcomes[i]!;
    if (o.kind === 'unfinished') report.unfinished.push(folder);
    else if (o.kind === 'skipped') report.skipped.push({ folder, reason: o.reason });
    else if (o.kind === 'damaged') report.damaged.push({ folder, message: o.message });
    else if (byKey.has(o.record.run_key)) report.duplicates.push(folder);
    else byKey.set(o.record.run_key, o.record);
  });
  report.filed = byKey.size;
  return { records: [...byKey.values()], report };
}

/** Replaces the registry's runs with those read from `runsDirs`. */
export async function rebuildRegistry(
  registryPath: string,
  runsDirs: readonly string[],
  options: RebuildOptions = {},
): Promise<RebuildReport> {
  const { records, report } = await collectRuns(runsDirs, options);
  const registry = Registry.open(registryPath);
  try {
    registry.replaceAllRuns(records);
    return { ...report, unregistered: registry.unregisteredWithRuns() };
  } finally {
    registry.close();
  }
}
