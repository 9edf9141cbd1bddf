import { open, type FileHandle } from 'node:fs/promises';
import { join } from 'node:path';

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
  private index: number;
  private chain: Promise<void> = Promise.resolve();
  private failure: Error | null = null;
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

  async close(): Promise<void> {
    await this.flush();
    await this.chain;
    if (this.handle) await this.handle.close();
    this.handle = null;
  }

  private currentPath(): string {
    if (this.o.rotateBytes === undefined) return join(this.o.dir, this.o.name);
    return join(this.o.dir, `${this.o.name}${String(this.index).padStart(4, '0')}${this.o.ext ?? '.csv'}`);
  }

  private async openFile(): Promise<void> {
    const path = this.currentPath();
    this.handle = await open(path, 'a');
    this.fileBytes = (await this.handle.stat()).size;
    this.files.push(path);
    if (this.fileBytes === 0 && this.o.header) {
      await this.handle.write(this.o.header + '\n');
      this.fileBytes += this.o.header.length + 1;
    }
  }

  private async writeRows(rows: string[]): Promise<void> {
    if (rows.length === 0 && this.handle) return;
    if (!this.handle) await this.openFile();
    let batch: string[] = [];
    let batchBytes = 0;
    for (const row of rows) {
      const limit = this.o.rotateBytes;
      if (limit !== undefined && this.fileBytes + batchBytes + row.length + 1 > limit && this.fileBytes + batchBytes > 0) {
        await this.writeBatch(batch, batchBytes);
        batch = [];
        batchBytes = 0;
        await this.handle!.sync();
        await this.handle!.close();
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
