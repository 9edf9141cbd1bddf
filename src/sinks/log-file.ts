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

/** Size of each block rows are gathered in between flushes. */
const BLOCK_BYTES = 64 * 1024;
/** Written blocks kept for reuse: a long run does not allocate a block per flush for ever. */
const SPARE_BLOCKS = 8;

/**
 * An append-only log written in batches off the hot path: rows are gathered as bytes in memory,
 * `flush()` writes them to the file and, when asked, makes them durable (fdatasync). Rotation
 * happens only between rows, so no row is split, lost, doubled or reordered across files.
 */
export class LogFile {
  /** Filled blocks waiting for the next flush, and the block being filled. */
  private full: Buffer[] = [];
  private block: Buffer = Buffer.allocUnsafe(BLOCK_BYTES);
  private readonly spare: Buffer[] = [];
  private used = 0;
  private pendingBytes = 0;
  private handle: FileHandle | null = null;
  private fileBytes = 0;
  /** Bytes of the header this process wrote at the top of the current file. */
  private headerBytes = 0;
  private index: number;
  private chain: Promise<void> = Promise.resolve();
  private failure: Error | null = null;
  /** Whether bytes were written since the last fdatasync. */
  private unsynced = false;
  /** Compressions run one after another, apart from the writes, so a slow gzip never delays a flush. */
  private compressions: Promise<void> = Promise.resolve();
  private settled = false;
  readonly files: string[] = [];

  constructor(private readonly o: LogFileOptions) {
    this.index = o.firstIndex ?? 1;
  }

  /** Queues one line (without newline). Throws if an earlier write failed or the disk lags far behind. */
  append(line: string): void {
    this.appendWith(line, 3 * line.length + 1, writeLine);
  }

  /**
   * Queues one row that `write` puts into the buffer at `at` as bytes, line end included,
   * using at most `maxBytes`; it returns the position after the row. Lets a row go from its
   * fields to bytes with no string in between. Throws like `append`.
   */
  appendWith<T>(
    item: T,
    maxBytes: number,
    write: (item: T, buf: Buffer, at: number) => number,
  ): void {
    if (this.failure) throw this.failure;
    if (this.used + maxBytes > this.block.length) {
      if (this.used > 0) this.full.push(this.block.subarray(0, this.used));
      this.block = maxBytes <= BLOCK_BYTES ? this.newBlock() : Buffer.allocUnsafe(maxBytes);
      this.used = 0;
    }
    const end = write(item, this.block, this.used);
    this.pendingBytes += end - this.used;
    this.used = end;
    if (this.pendingBytes > (this.o.maxPendingBytes ?? 32 * 1024 * 1024)) {
      throw new Error(`${this.o.name}: ${this.pendingBytes} bytes are waiting for the disk`);
    }
  }

  /**
   * Writes everything queued so far to the file, where a crash of this process cannot take it;
   * with `sync`, also onto the disk (fdatasync), where a power loss cannot either. Calls are
   * serialised.
   */
  flush(sync = true): Promise<void> {
    if (this.used > 0) {
      this.full.push(this.block.subarray(0, this.used));
      // The written block stays with the write under way; new rows go to another one.
      this.block = this.newBlock();
    }
    const pieces = this.full;
    this.full = [];
    this.used = 0;
    this.pendingBytes = 0;
    this.chain = this.chain.then(async () => {
      if (this.failure) throw this.failure;
      try {
        await this.writeRows(pieces);
        if (sync && this.unsynced) {
          // fdatasync is enough for an appended file: it makes the new size durable with the
          // rows, and skips the timestamps a full fsync would also write.
          await this.handle!.datasync();
          this.unsynced = false;
        }
      } catch (err) {
        this.failure = err as Error;
        throw err;
      }
      for (const piece of pieces) this.recycle(piece);
    });
    return this.chain;
  }

  private newBlock(): Buffer {
    return this.spare.pop() ?? Buffer.allocUnsafe(BLOCK_BYTES);
  }

  /** A written piece goes back to the spares if it is the start of one of our whole blocks. */
  private recycle(piece: Buffer): void {
    if (
      this.spare.length >= SPARE_BLOCKS ||
      piece.byteOffset !== 0 ||
      piece.buffer.byteLength !== BLOCK_BYTES
    )
      return;
    this.spare.push(Buffer.from(piece.buffer, 0, BLOCK_BYTES));
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
    return join(
      this.o.dir,
      `${this.o.name}${String(this.index).padStart(4, '0')}${this.o.ext ?? '.csv'}`,
    );
  }

  private async openFile(): Promise<void> {
    if (!this.settled) await this.settle();
    // A number already taken by a compressed file is never reused: a plain file beside it
    // would hide its rows from readers, which prefer the plain file.
    while (this.o.rotateBytes !== undefined && (await exists(this.currentPath() + GZ_EXT)))
      this.index++;
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

  /** Blocks of whole rows (each ending in a line feed), in order; files are rotated at row ends. */
  private async writeRows(pieces: Buffer[]): Promise<void> {
    if (this.handle && pieces.every((p) => p.length === 0)) return;
    if (!this.handle) await this.openFile();
    const bytes = pieces.reduce((n, p) => n + p.length, 0);
    if (this.o.rotateBytes === undefined || this.fileBytes + bytes <= this.o.rotateBytes) {
      // Everything fits in the current file: one gathered write.
      await writeAll(this.handle!, pieces);
      this.fileBytes += bytes;
    } else for (const rows of pieces) await this.writePiece(rows);
    this.unsynced = true;
  }

  private async writePiece(rows: Buffer): Promise<void> {
    let from = 0;
    const limit = this.o.rotateBytes;
    while (limit !== undefined && from < rows.length) {
      const room = limit - this.fileBytes;
      if (rows.length - from <= room) break;
      // The rows that fit, up to the last line end within the room.
      let cut = room > 0 ? rows.lastIndexOf(10, from + room - 1) + 1 : 0;
      if (cut <= from) cut = from;
      // A file always takes at least one row, so a limit below header + row cannot rotate forever.
      if (cut === from && this.fileBytes === this.headerBytes)
        cut = rows.indexOf(10, from) + 1 || rows.length;
      await this.writeBytes(rows.subarray(from, cut));
      from = cut;
      // A new file starts only for a row that has to go in it.
      if (from === rows.length) break;
      await this.handle!.datasync();
      await this.handle!.close();
      if (this.o.compressClosed) this.compressLater(this.currentPath());
      this.index++;
      await this.openFile();
    }
    await this.writeBytes(rows.subarray(from));
  }

  private async writeBytes(bytes: Buffer): Promise<void> {
    if (bytes.length === 0) return;
    await writeAll(this.handle!, [bytes]);
    this.fileBytes += bytes.length;
  }
}

/** Writes every byte: a short write (a disk filling up) is followed by the rest, whose failure is the error. */
async function writeAll(handle: FileHandle, pieces: Buffer[]): Promise<void> {
  const left = pieces.filter((p) => p.length > 0);
  while (left.length > 0) {
    let { bytesWritten } = await handle.writev(left);
    if (bytesWritten === 0) throw new Error('the disk took no bytes of a write');
    while (left.length > 0 && bytesWritten >= left[0]!.length) bytesWritten -= left.shift()!.length;
    if (bytesWritten > 0) left[0] = left[0]!.subarray(bytesWritten);
  }
}

function writeLine(line: string, buf: Buffer, at: number): number {
  const end = at + buf.write(line, at, 'utf8');
  buf[end] = 10;
  return end + 1;
}

async function exists(path: string): Promise<boolean> {
  try {
    await access(path);
    return true;
  } catch {
    return false;
  }
}
