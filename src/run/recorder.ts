/**
 * The recorder of one run folder: the rotating sample log, the event log, the manifest, the
 * checkpoint and the result, through the typed writers of src/record. Its disk-error policy: the
 * first failure to write is reported once (the run then switches the load off); after it, no
 * checkpoint or result is written over what is on disk.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { writeCheckpoint, type Checkpoint } from '../record/checkpoint.js';
import { EventLog, type RigLineEvent } from '../record/event-log.js';
import type { EventRecord, RunEvent } from '../record/events.js';
import { writeManifest, type RunManifest } from '../record/manifest.js';
import { resultPath, writeResult, type RunResult } from '../record/result.js';
import type { CompressOutcome } from '../sinks/compress.js';
import { LogFile } from '../sinks/log-file.js';
import {
  SAMPLE_HEADER,
  sampleRowMaxBytes,
  SampleRowWriter,
  type SampleRow,
} from '../sinks/sample-row.js';

export interface RecorderOptions {
  folder: string;
  /** Sample file size before rotation. */
  rotateBytes: number;
  /** Number of the first sample file (a resumed run continues the numbering). @default 1 */
  firstIndex?: number;
  /** The run's time for an event: seconds since its origin, and wall ms. */
  now(): { hostS: number; wallMs: number };
  /** Every event written, for the run's observers. */
  written(rec: EventRecord): void;
  /** The first failure to write the folder. */
  diskError(e: Error): void;
}

export class RunRecorder {
  private readonly samples: LogFile;
  private readonly rowWriter = new SampleRowWriter();
  private readonly events: EventLog;
  private failure: Error | null = null;
  private closing = false;
  private checkpointing = false;

  constructor(private readonly o: RecorderOptions) {
    this.samples = new LogFile({
      dir: o.folder,
      name: 'samples-',
      ext: '.csv',
      header: SAMPLE_HEADER,
      rotateBytes: o.rotateBytes,
      firstIndex: o.firstIndex ?? 1,
      // Closed files are gzipped (about 6:1); the file being written always stays plain.
      compressClosed: true,
      onCompressed: (c) => this.compressed(c),
    });
    this.events = new EventLog(o.folder);
  }

  /** Written once, before anything is switched on. */
  static async writeManifest(folder: string, manifest: RunManifest): Promise<void> {
    try {
      await writeManifest(folder, manifest);
    } catch (e) {
      throw makeError(
        ErrorCodes.RUN_FOLDER,
        `cannot write the manifest: ${(e as Error).message}`,
        folder,
        'Choose a run folder you can write to (--runs). Nothing was switched on.',
      );
    }
  }

  get diskError(): Error | null {
    return this.failure;
  }

  /** The sample file being written, or null before the first row. */
  get sampleFile(): string | null {
    return this.samples.files.at(-1) ?? null;
  }

  event(ev: RunEvent): void {
    const { hostS, wallMs } = this.o.now();
    this.o.written(this.events.write(hostS, wallMs, ev));
  }

  /** An event of a kind the event table does not define yet (see EventLog.writeForeign). */
  foreign(name: string, detail: Record<string, unknown>): void {
    const { hostS, wallMs } = this.o.now();
    this.events.writeForeign(hostS, wallMs, name, detail);
  }

  /** A rig line's event, within its per-minute budget (see EventLog.rigLine). */
  rigLine(ev: RigLineEvent): void {
    const { hostS, wallMs } = this.o.now();
    const rec = this.events.rigLine(hostS, wallMs, ev);
    if (rec) this.o.written(rec);
  }

  rejected(reason: string, detail: string, line: string): void {
    const { hostS, wallMs } = this.o.now();
    this.events.rejected(hostS, wallMs, reason, detail, line);
  }

  sample(row: SampleRow): void {
    try {
      this.samples.appendWith(row, sampleRowMaxBytes(row), this.rowWriter.write);
    } catch (e) {
      this.failed(e as Error);
    }
  }

  /**
   * Writes the queued rows and events to their files (every second: a crash of the daemon loses
   * at most that much); the checkpoint puts them on the disk.
   */
  async flush(): Promise<void> {
    try {
      await Promise.all([this.samples.flush(false), this.events.flush(false)]);
    } catch (e) {
      this.failed(e as Error);
    }
  }

  /**
   * Puts the logs on the disk, then replaces checkpoint.json (every few seconds: a power loss
   * loses at most that much, and the checkpoint never counts rows the disk does not hold);
   * skipped while one is being written or after a disk error.
   */
  async checkpoint(c: Checkpoint): Promise<void> {
    if (this.checkpointing || this.failure) return;
    this.checkpointing = true;
    try {
      await Promise.all([this.samples.flush(true), this.events.flush(true)]);
      await writeCheckpoint(this.o.folder, c);
    } catch (e) {
      this.failed(e as Error);
    } finally {
      this.checkpointing = false;
    }
  }

  /** The run's last events: the rejected-line summary, then `last`. */
  ended(last: RunEvent): void {
    this.closing = true;
    const { hostS, wallMs } = this.o.now();
    this.events.summarise(hostS, wallMs);
    this.event(last);
  }

  /** The logs closed, then the final checkpoint and the result written (unless writing failed). */
  async close(checkpoint: () => Checkpoint, result: RunResult): Promise<void> {
    await this.closeLogs().catch((e: Error) => this.failed(e));
    if (this.failure) return;
    await writeCheckpoint(this.o.folder, checkpoint()).catch((e: Error) => this.failed(e));
    await writeResult(resultPath(this.o.folder), result).catch((e: Error) => this.failed(e));
  }

  /** Closes the logs without a result (a run that never got its rig). */
  async abandon(): Promise<void> {
    this.closing = true;
    await this.closeLogs().catch(() => undefined);
  }

  private closeLogs(): Promise<void> {
    return Promise.all([this.samples.close(), this.events.close()]).then(() => undefined);
  }

  private compressed(c: CompressOutcome): void {
    if (this.closing) return;
    if (c.error)
      this.event({
        event: 'compress_failed',
        file: c.file,
        error: c.error.message,
        note: 'the plain file is kept',
      });
    else
      this.event({
        event: 'sample_file_compressed',
        file: c.file,
        bytes_in: c.bytesIn,
        bytes_out: c.bytesOut,
      });
  }

  private failed(e: Error): void {
    if (this.failure) return;
    this.failure = e;
    this.o.diskError(e);
  }
}
