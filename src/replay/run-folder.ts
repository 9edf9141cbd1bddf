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
import { readLineBatchesRaw, readLines, type AsciiLines, type TextLine } from './line-reader.js';
import {
  blankSampleRecord,
  SampleReader,
  checkSampleHeader,
  SampleLineError,
  type SampleRecord,
} from './sample-csv.js';

export interface SampleFile {
  path: string;
  name: string;
  index: number;
  gzip: boolean;
  bytes: number;
}

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

/** A line left out because an interrupted write cut it short. */
export interface CutLine {
  file: string;
  line: number;
}

export interface SampleReadOptions {
  /** File bytes read since the last call (compressed bytes for .gz files). */
  onBytes?: (bytes: number) => void;
  onCutLine?: (cut: CutLine) => void;
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
  const pauses = visitRunSamples(run, o, (row) => out.push({ ...row }));
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

/**
 * The rows of readRunSamples, with the same reports and errors in the same order, handed to
 * `visit` one by one for a recompute of millions of rows: no promise, string or object per row
 * (plain ASCII rows are parsed from the bytes read into one record). The record is the same
 * object every time: `visit` reads it and must not keep it.
 */
export async function forEachRunSample(
  run: RunFolder,
  o: SampleReadOptions,
  visit: (row: Readonly<SampleRecord>) => void,
): Promise<void> {
  for await (const _ of visitRunSamples(run, o, visit));
}

/**
 * One sample file's rows, visited into one record: its header row first, then rows for the
 * run's channel. A row cut off by an interruption may only be the last file's last line.
 */
class SampleFileVisit {
  private header = false;

  constructor(
    private readonly run: RunFolder,
    private readonly file: SampleFile,
    private readonly mayBeCut: boolean,
    private readonly reader: SampleReader,
    private readonly row: SampleRecord,
    private readonly visit: (row: SampleRecord) => void,
  ) {}

  /** One line of text; false when it was cut off by an interruption (to be reported once the rows before it are out). */
  takeText(line: TextLine): boolean {
    const cut = !line.terminated && this.mayBeCut;
    if (!this.header) {
      if (cut) return false;
      checkSampleHeader(line.text, this.file.name);
      this.header = true;
      return true;
    }
    try {
      this.reader.parseLine(line.text, this.row);
    } catch (e) {
      if (!(e instanceof SampleLineError)) throw e;
      if (cut) return false;
      throw this.malformed(e, line.number);
    }
    this.take(line.number);
    return true;
  }

  /** Lines from bytes, all terminated: none can be a cut one. */
  takeBytes({ bytes, starts, ends, first }: AsciiLines): void {
    let k = 0;
    if (!this.header) {
      checkSampleHeader(bytes.toString('latin1', starts[0], ends[0]), this.file.name);
      this.header = true;
      k = 1;
    }
    try {
      for (; k < starts.length; k++) {
        this.reader.parseBytes(bytes, starts[k]!, ends[k]!, this.row);
        this.take(first + k);
      }
    } catch (e) {
      throw e instanceof SampleLineError ? this.malformed(e, first + k) : e;
    }
  }

  /** A file other than the last must have had at least its header row. */
  finish(): void {
    if (this.header || this.mayBeCut) return;
    throw makeError(
      ErrorCodes.RUN_DATA,
      'the file is empty, without even its header row',
      join(basename(this.run.dir), this.file.name),
      'Restore the file from a backup; the files after it need it.',
    );
  }

  private take(number: number): void {
    const channel = this.run.manifest.channel;
    if (this.row.channel !== channel)
      throw makeError(
        ErrorCodes.RUN_DATA,
        `a row for channel ${this.row.channel} in a run on channel ${channel}`,
        this.where(number),
        'The file does not belong to this run folder; move it back to its own run.',
      );
    this.visit(this.row);
  }

  private where(line: number): string {
    return `${join(basename(this.run.dir), this.file.name)} line ${line}`;
  }

  private malformed(e: SampleLineError, number: number): Error {
    return makeError(
      ErrorCodes.RUN_DATA,
      `a sample row is malformed: ${e.message}`,
      this.where(number),
      'Rows are written by `cellvigil run` and never edited; restore the file from a backup, or move the damaged rows to another file and recompute what remains.',
    );
  }
}

/** Visits the rows; pauses after each read and before reporting a cut line, so a caller can hand on the rows visited so far first. */
async function* visitRunSamples(
  run: RunFolder,
  o: SampleReadOptions,
  visit: (row: SampleRecord) => void,
): AsyncGenerator<void> {
  const row = blankSampleRecord();
  const reader = new SampleReader();
  const lastFile = run.sampleFiles.length - 1;
  for (const [fi, f] of run.sampleFiles.entries()) {
    const file = new SampleFileVisit(run, f, fi === lastFile, reader, row, visit);
    const read = { gzip: f.gzip, ...(o.onBytes ? { onBytes: o.onBytes } : {}) };
    for await (const batch of readLineBatchesRaw(f.path, read)) {
      if (!Array.isArray(batch)) file.takeBytes(batch);
      else
        for (const line of batch) {
          if (file.takeText(line)) continue;
          yield;
          o.onCutLine?.({ file: f.name, line: line.number });
        }
      yield;
    }
    file.finish();
  }
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
