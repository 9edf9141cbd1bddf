import { access, open, type FileHandle } from 'node:fs/promises';
import { join } from 'node:path';
import { compressClosedFile, GZ_EXT, settleRotated, type CompressOutcome } from './compress.js';

export interface LogFileOptions {
  dir: string;
  /** File name, or with `rotate`, the prefix before the 4-digit number (`samples-` -> samples-0001.csv). */
  name: string;
  /** Extension for rotated files. @default '.csv' */
  ext?: string;
  /** Written at the top of every file (a CSV header row). */
  header?: string;
  /** Start a new file once this many bytes are written; absent: never rotate. */
  rotateBytes?: number;
  /** Numbering of the first file (resuming continues after the last one). @default 1 */
  firstIndex?: number;
  /** Held in memory before `append` reports the disk is not keeping up. @default 32 MiB */
  maxPendingBytes?: number;
  /**
   * With `rotate`: gzip each file once the log has moved on to the next one, in the background,
   * to `<file>.gz` (see compress.ts for the crash-safe order of steps). The file being written
   * is never compressed. On the first write, leftovers of an interrupted compression in the
   * folder are settled and closed plain files below `firstIndex` are compressed. @default false
   */
  compressClosed?: boolean;
  /** Told about every compression, done or failed (a failure keeps the plain file). */
  onCompressed?: (outcome: CompressOutcome) => void;
}

/**
 * An append-only log written in batches off the hot path: rows are buffered in memory and
 * `flush()` writes and fsyncs them. Rotation happens only between rows, so no row is split,
 * lost, doubled or reordered across files.
 */
export class LogFile {
  private pending: string[] = [];
  private pendingBytes = 0;
  private handle: FileHandle | null = null;
  private fileBytes = 0;
  /** Bytes of the header this process wrote at the top of the current file. */
  private headerBytes = 0;
  private index: number;
  private chain: Promise<void> = Promise.resolve();
  private failure: Error | null = null;
  /** Compressions run one after another, apart from the writes, so a slow gzip never delays a flush. */
  private compressions: Promise<void> = Promise.resolve();
  private settled = false;
  readonly files: string[] = [];

  constructor(private readonly o: LogFileOptions) {
    this.index = o.firstIndex ?? 1;
  }

  /** Queues one line (without newline). Throws if an earlier write failed or the disk lags far behind. */
  append(line: string): void {
    if (this.failure) throw this.failure;
    this.pending.push(line);
    this.pendingBytes += line.length + 1;
    if (this.pendingBytes > (this.o.maxPendingBytes ?? 32 * 1024 * 1024)) {
      throw new Error(`${this.o.name}: ${this.pendingBytes} bytes are waiting for the disk`);
    }
  }

  /** Writes and fsyncs everything queued so far; calls are serialised. */
  flush(): Promise<void> {
    const rows = this.pending;
    this.pending = [];
    this.pendingBytes = 0;
    this.chain = this.chain.then(async () => {
      if (this.failure) throw this.failure;
      try {
        await this.writeRows(rows);
      } catch (err) {
        this.failure = err as Error;
        throw err;
      }
    });
    return this.chain;
  }

  /** Writes what is queued, closes the file and waits for compressions under way. The last file stays plain. */
  async close(): Promise<void> {
    try {
      await this.flush();
      await this.chain;
    } finally {
      // Closed even when the last write failed (a full disk): an open handle would pin the file system.
      const h = this.handle;
      this.handle = null;
      await h?.close().catch(() => undefined);
      await this.compressions;
    }
  }

  private compressLater(path: string): void {
    this.compressions = this.compressions.then(async () => {
      const outcome = await compressClosedFile(path);
      this.o.onCompressed?.(outcome);
    });
  }

  /** Run once before the first file is opened: finishes what an interrupted run left half done. */
  private async settle(): Promise<void> {
    this.settled = true;
    if (!this.o.compressClosed || this.o.rotateBytes === undefined) return;
    const closed = await settleRotated(this.o.dir, this.o.name, this.o.ext ?? '.csv', this.index);
    for (const path of closed) this.compressLater(path);
  }

  private currentPath(): string {
    if (this.o.rotateBytes === undefined) return join(this.o.dir, this.o.name);
    return join(this.o.dir, `${this.o.name}${String(this.index).padStart(4, '0')}${this.o.ext ?? '.csv'}`);
  }

  private async openFile(): Promise<void> {
    if (!this.settled) await this.settle();
    // A number already taken by a compressed file is never reused: a plain file beside it
    // would hide its rows from readers, which prefer the plain file.
    while (this.o.rotateBytes !== undefined && (await exists(this.currentPath() + GZ_EXT))) this.index++;
    const path = this.currentPath();
    this.handle = await open(path, 'a');
    this.fileBytes = (await this.handle.stat()).size;
    this.files.push(path);
    this.headerBytes = 0;
    if (this.fileBytes === 0 && this.o.header) {
      await this.handle.write(this.o.header + '\n');
      this.headerBytes = this.o.header.length + 1;
      this.fileBytes += this.headerBytes;
    }
  }

  private async writeRows(rows: string[]): Promise<void> {
    if (rows.length === 0 && this.handle) return;
    if (!this.handle) await this.openFile();
    let batch: string[] = [];
    let batchBytes = 0;
    for (const row of rows) {
      const limit = this.o.rotateBytes;
      // A file always takes at least one row, so a limit below header + row cannot rotate forever.
      const holdsRows = this.fileBytes + batchBytes > this.headerBytes;
      if (limit !== undefined && this.fileBytes + batchBytes + row.length + 1 > limit && holdsRows) {
        await this.writeBatch(batch, batchBytes);
        batch = [];
        batchBytes = 0;
        await this.handle!.sync();
        await this.handle!.close();
        if (this.o.compressClosed) this.compressLater(this.currentPath());
        this.index++;
        await this.openFile();
      }
      batch.push(row);
      batchBytes += row.length + 1;
    }
    await this.writeBatch(batch, batchBytes);
    await this.handle!.sync();
  }

  private async writeBatch(batch: string[], bytes: number): Promise<void> {
    if (batch.length === 0) return;
    await this.handle!.write(batch.join('\n') + '\n');
    this.fileBytes += bytes;
  }
}

async function exists(path: string): Promise<boolean> {
  try {
    await access(path);
    return true;
  } catch {
    return false;
  }
}
