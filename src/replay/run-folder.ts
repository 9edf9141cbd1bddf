/**
 * Reading a run folder (docs/run-folder.md): the manifest, the sample files in number order
 * (plain or gzip-compressed), the event log, the checkpoint and the result. Samples and events
 * are streamed, so a run of any length is read in bounded memory.
 */
import { readdir, readFile, stat } from 'node:fs/promises';
import { basename, join } from 'node:path';
import { ErrorCodes, makeError } from '../core/errors.js';
import { CHECKPOINT_FILE, readCheckpointFile, type Checkpoint } from '../record/checkpoint.js';
import { EVENTS_FILE, parseEventLine, type LoggedEvent } from '../record/event-log.js';
import { MANIFEST_FILE, parseManifest, type RunManifest } from '../record/manifest.js';
import { readResultFile, RESULT_FILE, type RunResult } from '../record/result.js';
import { readLines } from './line-reader.js';
import { type SampleRecord } from './sample-csv.js';
import { availableParallelism } from 'node:os';
import { forEachRowInWorkers, workerAvailable } from './sample-worker-client.js';
import {
  visitRunSamples,
  type CutLine,
  type SampleFile,
  type SampleReadOptions,
  type SampleSource,
} from './sample-visit.js';

export type { CutLine, SampleFile, SampleReadOptions };

export interface RunFolder {
  dir: string;
  manifest: RunManifest;
  /** In number order, each number once. */
  sampleFiles: SampleFile[];
  /** null when the run has no result.json (it was interrupted). */
  result: RunResult | null;
  checkpoint: Checkpoint | null;
  /** null when the run has no events.jsonl. */
  eventsPath: string | null;
  /** Things noticed while opening the folder, for the report. */
  notes: string[];
}

export async function openRunFolder(dir: string): Promise<RunFolder> {
  let names: string[];
  try {
    names = await readdir(dir);
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot open the run folder: ${(e as Error).message}`,
      dir,
      'Give the path of a folder written by `cellvigil run` (runs/<date>-<time>-<label>).',
    );
  }
  const manifestPath = join(dir, MANIFEST_FILE);
  let manifestText: string;
  try {
    manifestText = await readFile(manifestPath, 'utf8');
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `the folder has no readable manifest.json (${(e as NodeJS.ErrnoException).code ?? (e as Error).message})`,
      dir,
      'Give the path of a folder written by `cellvigil run`; every run folder starts with its manifest.json.',
    );
  }
  const manifest = parseManifest(manifestText, manifestPath);
  const notes: string[] = [];
  const sampleFiles = await listSampleFiles(dir, names, manifest.samples.prefix, notes);
  const result = await readResultFile(join(dir, RESULT_FILE));
  const checkpoint = await readCheckpointFile(join(dir, CHECKPOINT_FILE));
  if (sampleFiles.length === 0) {
    const frames = result?.frames_accepted ?? checkpoint?.frames_accepted ?? 0;
    if (frames > 0) {
      throw makeError(
        ErrorCodes.RUN_DATA,
        `the run accepted ${frames} frames but the folder holds no sample file (${manifest.samples.prefix}0001.csv)`,
        dir,
        'Restore the sample files into the run folder; without the raw counts nothing can be recomputed.',
      );
    }
    notes.push(
      'The folder holds no sample file: the rig sent no frame, so there is nothing to recompute.',
    );
  }
  return {
    dir,
    manifest,
    sampleFiles,
    result,
    checkpoint,
    eventsPath: names.includes(EVENTS_FILE) ? join(dir, EVENTS_FILE) : null,
    notes,
  };
}

function escapeRe(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}

async function listSampleFiles(
  dir: string,
  names: string[],
  prefix: string,
  notes: string[],
): Promise<SampleFile[]> {
  const re = new RegExp(`^${escapeRe(prefix)}(\\d{4,})\\.csv(\\.gz)?$`);
  const byIndex = new Map<number, SampleFile>();
  for (const name of names) {
    const m = re.exec(name);
    if (!m) continue;
    const index = Number(m[1]);
    const gzip = m[2] !== undefined;
    const have = byIndex.get(index);
    if (have) {
      // Both forms: compression was under way or its original was kept; the plain file is whole either way.
      notes.push(`${prefix}${m[1]}.csv exists both plain and compressed; the plain file was read.`);
      if (gzip) continue;
    }
    byIndex.set(index, { path: join(dir, name), name, index, gzip, bytes: 0 });
  }
  const files = [...byIndex.values()].sort((a, b) => a.index - b.index);
  for (const [i, f] of files.entries()) {
    if (f.index !== i + 1) {
      throw makeError(
        ErrorCodes.RUN_DATA,
        `sample file number ${i + 1} is missing (the files go on with ${f.name})`,
        dir,
        'Restore the missing file; rows are never split across files, so without it the run cannot be recomputed.',
      );
    }
    f.bytes = (await stat(f.path)).size;
  }
  return files;
}

/** Every sample row of the run, in order. A row cut off at the very end (an interrupted write) is left out and reported. */
export async function* readRunSamples(
  run: RunFolder,
  o: SampleReadOptions = {},
): AsyncGenerator<SampleRecord> {
  const out: SampleRecord[] = [];
  const pauses = visitRunSamples(sourceOf(run), o, (row) => out.push({ ...row }));
  try {
    for await (const _ of pauses) {
      yield* out;
      out.length = 0;
    }
  } catch (e) {
    // The rows read before a fault go out before it.
    yield* out;
    throw e;
  }
}

/** Sample files of at least this many bytes in all are read on worker threads, on two cores or more. */
const WORKER_MIN_BYTES = 8 * 1024 * 1024;

/**
 * The rows of readRunSamples, with the same reports and errors in the same order, handed to
 * `visit` one by one for a recompute of millions of rows: no promise, string or object per row
 * (plain ASCII rows are parsed from the bytes read into one record). The record is the same
 * object every time: `visit` reads it and must not keep it.
 *
 * A large run's files are read and parsed on worker threads while this one visits the rows
 * (the same reading code, so the same rows, reports and errors); `worker` forces the choice.
 */
export async function forEachRunSample(
  run: RunFolder,
  o: SampleReadOptions & { worker?: boolean },
  visit: (row: Readonly<SampleRecord>) => void,
): Promise<void> {
  const source = sourceOf(run);
  const bytes = run.sampleFiles.reduce((t, f) => t + f.bytes, 0);
  const cores = availableParallelism();
  const auto = bytes >= WORKER_MIN_BYTES && cores >= 2 && workerAvailable();
  const { worker = auto, ...read } = o;
  // One worker beside this thread on two cores; with four, two (this thread's measuring of the
  // rows is then the slower side of the pipe).
  if (worker) return forEachRowInWorkers(source, read, visit, { workers: cores >= 4 ? 2 : 1 });
  for await (const _ of visitRunSamples(source, read, visit));
}

function sourceOf(run: RunFolder): SampleSource {
  return {
    dir: run.dir,
    channel: run.manifest.channel,
    sampleFiles: run.sampleFiles,
    lastFile: run.sampleFiles.at(-1)?.name ?? '',
  };
}

/** Every event of the run, in order; a last line cut off by an interruption is left out and reported. */
export async function* readRunEvents(
  run: RunFolder,
  o: { onCutLine?: (cut: CutLine) => void } = {},
): AsyncGenerator<LoggedEvent> {
  if (run.eventsPath === null) return;
  for await (const line of readLines(run.eventsPath)) {
    const parsed = parseEventLine(line.text);
    if (parsed.ok) {
      yield parsed.event;
    } else if (!line.terminated) {
      o.onCutLine?.({ file: EVENTS_FILE, line: line.number });
    } else {
      throw makeError(
        ErrorCodes.RUN_DATA,
        `an event line is ${parsed.problem}`,
        `${join(basename(run.dir), EVENTS_FILE)} line ${line.number}`,
        'Each line of events.jsonl is one JSON object with host_s, wall_time, event and the fields of its kind (docs/run-folder.md); restore the file or delete the damaged line.',
      );
    }
  }
}
