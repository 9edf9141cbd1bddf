/**
 * A run's sample rows, file after file, each checked and parsed into one reused record: the
 * one way rows are read, whether on the caller's thread or on a worker (sample-worker.ts).
 */
import { basename, join } from 'node:path';
import { ErrorCodes, makeError } from '../core/errors.js';
import { readLineBatchesRaw, type AsciiLines, type TextLine } from './line-reader.js';
import {
  blankSampleRecord,
  checkSampleHeader,
  SampleLineError,
  SampleReader,
  type SampleRecord,
} from './sample-csv.js';

export interface SampleFile {
  path: string;
  name: string;
  index: number;
  gzip: boolean;
  bytes: number;
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

/** What the rows are read from: sample files of the run folder and the channel they are for. */
export interface SampleSource {
  dir: string;
  channel: number;
  /** In number order; a worker reading every other file has only those. */
  sampleFiles: SampleFile[];
  /** The name of the run's last sample file, the one file whose last row may be cut off. */
  lastFile: string;
}

/**
 * One sample file's rows, visited into one record: its header row first, then rows for the
 * run's channel. A row cut off by an interruption may only be the last file's last line.
 */
class SampleFileVisit {
  private header = false;

  constructor(
    private readonly run: SampleSource,
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
    const channel = this.run.channel;
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
export async function* visitRunSamples(
  run: SampleSource,
  o: SampleReadOptions,
  visit: (row: SampleRecord) => void,
  /** The parser, given when the visitor reads more of the row than the record holds. */
  reader = new SampleReader(),
): AsyncGenerator<void> {
  const row = blankSampleRecord();
  for (const f of run.sampleFiles) {
    const file = new SampleFileVisit(run, f, f.name === run.lastFile, reader, row, visit);
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
