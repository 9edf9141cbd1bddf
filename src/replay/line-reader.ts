/**
 * Lines of a text file, plain or gzip-compressed, streamed: memory stays bounded however long
 * the run was. The last line says whether it had its line end, so a row cut off
 * by an interrupted write can be told from a complete one.
 */
import { isAscii } from 'node:buffer';
import { createReadStream } from 'node:fs';
import { open } from 'node:fs/promises';
import { StringDecoder } from 'node:string_decoder';
import { createGunzip } from 'node:zlib';
import { ErrorCodes, makeError } from '../core/errors.js';

export interface TextLine {
  text: string;
  /** 1-based line number in the file. */
  number: number;
  /** False only for a last line without its line end. */
  terminated: boolean;
}

export interface LineReadOptions {
  gzip?: boolean;
  /** Called with the number of file bytes (compressed, for gzip) read since the last call. */
  onBytes?: (bytes: number) => void;
  /** Longest line accepted; a longer one is damage, not data. @default 1 MiB */
  maxLineBytes?: number;
}

/**
 * Lines of ASCII text as places in one buffer, every one of them terminated: the reader hands
 * sample rows over this way so they can be parsed from the bytes, without a string per line.
 */
export interface AsciiLines {
  bytes: Buffer;
  starts: number[];
  ends: number[];
  /** Number of the first line. */
  first: number;
}

/** A batch of lines: decoded text, or ASCII bytes. */
export type LineBatch = TextLine[] | AsciiLines;

/**
 * Splits decoded text into lines exactly as node:readline does with `crlfDelay: Infinity`:
 * `\n`, `\r\n` and a lone `\r` each end a line, and a `\r` at the end of one chunk swallows a
 * `\n` at the start of the next. Used for text that is not plain ASCII.
 */
class TextSplitter {
  private readonly decoder = new StringDecoder('utf8');

  /** Takes over from the byte splitter: everything before was ASCII, so nothing is half decoded. */
  constructor(
    private buffer: string,
    private sawReturn: boolean,
  ) {}

  /** Appends the lines that `chunk` completes to `out`. */
  push(chunk: Buffer, out: string[]): void {
    let text = this.decoder.write(chunk);
    if (this.sawReturn) {
      if (text.charCodeAt(0) === 10) text = text.slice(1);
      this.sawReturn = false;
    }
    if (text.indexOf('\n') < 0 && text.indexOf('\r') < 0) {
      this.buffer += text;
      return;
    }
    const all = this.buffer + text;
    let from = 0;
    let nl = all.indexOf('\n');
    let cr = all.indexOf('\r');
    for (;;) {
      if (nl >= 0 && (cr < 0 || nl < cr)) {
        out.push(all.slice(from, nl));
        from = nl + 1;
        nl = all.indexOf('\n', from);
      } else if (cr >= 0) {
        out.push(all.slice(from, cr));
        from = all.charCodeAt(cr + 1) === 10 ? cr + 2 : cr + 1;
        if (nl >= 0 && nl < from) nl = all.indexOf('\n', from);
        cr = all.indexOf('\r', from);
      } else {
        break;
      }
    }
    this.buffer = all.slice(from);
    this.sawReturn = all.charCodeAt(all.length - 1) === 13;
  }

  /** The unfinished last line, if any (readline drops bytes of a character cut off at the end). */
  end(): string | null {
    return this.buffer.length > 0 ? this.buffer : null;
  }
}

/**
 * The same splitting on bytes, for as long as the text is ASCII (where a byte is a character);
 * the first chunk that is not hands the rest of the file to a TextSplitter. The reader keeps
 * the unfinished line at the front of the buffer it reads the next chunk into, so lines are
 * found in place, without joining buffers.
 */
class ByteSplitter {
  private sawReturn = false;
  private text: TextSplitter | null = null;

  /**
   * The lines completed in `bytes[0, length)`, of which `bytes[0, fresh)` is the unfinished
   * line carried over and the rest new data: their places go to `starts` and `ends` and the
   * return value is where the unfinished tail starts; once the file is not ASCII they go to
   * `textOut` as text, and the return value is -1.
   */
  push(
    bytes: Buffer,
    fresh: number,
    length: number,
    starts: number[],
    ends: number[],
    textOut: string[],
  ): number {
    const chunk = bytes.subarray(fresh, length);
    if (this.text === null && !isAscii(chunk))
      this.text = new TextSplitter(bytes.toString('latin1', 0, fresh), this.sawReturn);
    if (this.text !== null) {
      this.text.push(chunk, textOut);
      return -1;
    }
    // A carried line means the data before did not end in a line end, so no \r is pending.
    let from = this.sawReturn && bytes[fresh] === 10 ? fresh + 1 : 0;
    this.sawReturn = length > fresh && bytes[length - 1] === 13;
    // Searched within the data only: the buffer's bytes beyond are left from earlier reads.
    const data = bytes.subarray(0, length);
    let nl = data.indexOf(10, from);
    let cr = data.indexOf(13, from);
    for (;;) {
      if (nl >= 0 && (cr < 0 || nl < cr)) {
        starts.push(from);
        ends.push(nl);
        from = nl + 1;
        nl = data.indexOf(10, from);
      } else if (cr >= 0) {
        starts.push(from);
        ends.push(cr);
        from = data[cr + 1] === 10 ? cr + 2 : cr + 1;
        if (nl >= 0 && nl < from) nl = data.indexOf(10, from);
        cr = data.indexOf(13, from);
      } else {
        break;
      }
    }
    return from;
  }

  /** The unfinished last line, given the bytes carried (readline drops bytes of a character cut off at the end). */
  end(carried: string): string | null {
    if (this.text !== null) return this.text.end();
    return carried.length > 0 ? carried : null;
  }
}

/** New bytes read at a time: large enough that a read's round trip is small against the rows in it. */
export const READ_CHUNK_BYTES = 256 * 1024;
const CHUNK = READ_CHUNK_BYTES;

/**
 * Where a file's bytes come from: `fill` puts up to CHUNK new bytes into `target` at `at` and
 * says how many (0 at the end).
 */
interface ByteSource {
  fill(target: Buffer, at: number): Promise<number>;
  close(): Promise<void>;
}

/** A plain file, read straight into the reader's buffers. */
async function plainSource(path: string, onBytes?: (n: number) => void): Promise<ByteSource> {
  const handle = await open(path, 'r');
  return {
    fill: async (target, at) => {
      const { bytesRead } = await handle.read(target, at, CHUNK, null);
      if (bytesRead > 0) onBytes?.(bytesRead);
      return bytesRead;
    },
    close: () => handle.close(),
  };
}

/** A gzip file, decompressed as a stream and copied into the reader's buffers. */
function gzipSource(path: string, onBytes?: (n: number) => void): ByteSource {
  const file = createReadStream(path);
  const gunzip = createGunzip({ chunkSize: CHUNK });
  // A file that fails under gunzip would leave it waiting for more input forever.
  file.on('error', (e) => gunzip.destroy(e));
  if (onBytes) file.on('data', (chunk) => onBytes(chunk.length));
  const chunks = file.pipe(gunzip)[Symbol.asyncIterator]() as AsyncIterator<Buffer>;
  return {
    fill: async (target, at) => {
      const next = await chunks.next();
      if (next.done) return 0;
      next.value.copy(target, at);
      return next.value.length;
    },
    close: async () => {
      gunzip.destroy();
      file.destroy();
    },
  };
}

/**
 * Keeps the line-length limit without looking for line ends unless a line could pass it: no
 * line can be longer than what came since the last line end.
 */
class LineLengthGuard {
  private sinceNewline = 0;

  constructor(readonly maxLine: number) {}

  /** True when a line in the chunk bytes[0, length), new from `carried` on, passes the limit. */
  tooLong(bytes: Buffer, carried: number, length: number): boolean {
    const got = length - carried;
    let longest = 0;
    if (this.sinceNewline + got > this.maxLine) {
      let from = carried;
      const data = bytes.subarray(0, length);
      for (let nl = data.indexOf(10, from); nl >= 0; nl = data.indexOf(10, from)) {
        longest = Math.max(longest, (from === carried ? this.sinceNewline : 0) + nl - from);
        from = nl + 1;
      }
      this.sinceNewline = (from === carried ? this.sinceNewline : 0) + length - from;
    } else {
      const nl = bytes.lastIndexOf(10, length - 1);
      this.sinceNewline = nl < carried ? this.sinceNewline + got : length - nl - 1;
    }
    return Math.max(longest, this.sinceNewline) > this.maxLine;
  }
}

/**
 * Numbers the lines and makes the batches. A line is passed on once the next one is known, so
 * the last one is known to be last.
 */
class LineNumbering {
  /** Lines numbered so far, the held one included. */
  n = 0;
  private held: { text: string; number: number } | null = null;

  /** The complete ASCII lines of a chunk: the last of them is held back. */
  ascii(bytes: Buffer, starts: number[], ends: number[]): LineBatch[] {
    const out: LineBatch[] = this.release();
    const last = starts.length - 1;
    this.held = {
      text: bytes.toString('latin1', starts[last], ends[last]),
      number: this.n + starts.length,
    };
    if (last > 0)
      out.push({
        bytes,
        starts: starts.slice(0, last),
        ends: ends.slice(0, last),
        first: this.n + 1,
      });
    this.n += starts.length;
    return out;
  }

  /** The complete lines of a chunk that is not ASCII, as text. */
  text(lines: string[]): LineBatch[] {
    const batch: TextLine[] = [];
    if (this.held) batch.push({ ...this.held, terminated: true });
    for (let k = 0; k < lines.length - 1; k++)
      batch.push({ text: lines[k]!, number: ++this.n, terminated: true });
    this.held = { text: lines[lines.length - 1]!, number: ++this.n };
    return [batch];
  }

  /** The unfinished line at the end of the file, now known to be the last. */
  rest(text: string): LineBatch[] {
    const out = this.release();
    this.held = { text, number: ++this.n };
    return out;
  }

  /** The last line, with whether the file ended with a line end. */
  final(terminated: boolean): LineBatch[] {
    return this.held ? [[{ ...this.held, terminated }]] : [];
  }

  private release(): LineBatch[] {
    return this.held ? [[{ ...this.held, terminated: true }]] : [];
  }
}

/**
 * Two buffers taken in turn: the next chunk is read into one while the lines of the other are
 * worked on. Each has room for the unfinished line carried over in front of a chunk.
 */
class ChunkBuffers {
  /** Bytes of an unfinished line in front of the current buffer's new chunk. */
  carried = 0;
  private readonly buffers = [Buffer.allocUnsafe(2 * CHUNK), Buffer.allocUnsafe(2 * CHUNK)];
  private turn = 0;

  get current(): Buffer {
    return this.buffers[this.turn]!;
  }

  /** Carries bytes [tail, length) (none when tail < 0) to the front of the other buffer, and switches. */
  carry(tail: number, length: number): void {
    const bytes = this.current;
    this.turn ^= 1;
    this.carried = tail < 0 ? 0 : length - tail;
    if (this.carried + CHUNK > this.current.length)
      this.buffers[this.turn] = Buffer.allocUnsafe(this.carried + CHUNK);
    if (this.carried > 0) bytes.copy(this.current, 0, tail, length);
  }
}

function readFailure(path: string, gzip: boolean, f: Error, lines: number): Error {
  const gz = gzip && /unexpected end|incorrect header|invalid/i.test(f.message);
  return makeError(
    ErrorCodes.RUN_DATA,
    `cannot read ${gz ? 'the compressed file' : 'the file'}: ${f.message}`,
    `${path}${lines > 0 ? ` after line ${lines}` : ''}`,
    gz
      ? 'The gzip file is damaged or incomplete; restore it, or decompress what can be saved (zcat) into the .csv of the same number.'
      : 'Check that the file is readable and is the file the run wrote.',
  );
}

/**
 * The lines of a file a chunk at a time (READ_CHUNK_BYTES of the file per batch), in order:
 * the same lines, numbers, `terminated` flags and errors as readLines (which is built on it).
 * ASCII text comes as AsciiLines, anything else as TextLine[]. An AsciiLines batch's bytes are
 * the reader's own buffer: they hold until the next batch is asked for, and are reused after.
 */
export async function* readLineBatchesRaw(
  path: string,
  o: LineReadOptions = {},
): AsyncGenerator<LineBatch> {
  const guard = new LineLengthGuard(o.maxLineBytes ?? 1024 * 1024);
  const numbering = new LineNumbering();
  const chunks = new ChunkBuffers();
  const splitter = new ByteSplitter();
  const starts: number[] = [];
  const ends: number[] = [];
  const lines: string[] = [];
  let failure: Error | null = null;
  let lastByte = -1;
  let source: ByteSource | null = null;
  let reading: Promise<number> | null = null;
  try {
    source = o.gzip ? gzipSource(path, o.onBytes) : await plainSource(path, o.onBytes);
    reading = source.fill(chunks.current, 0);
    for (let got = await reading; got > 0; got = await reading) {
      const bytes = chunks.current;
      const length = chunks.carried + got;
      lastByte = bytes[length - 1]!;
      const tooLong = guard.tooLong(bytes, chunks.carried, length);
      starts.length = ends.length = lines.length = 0;
      const tail = splitter.push(bytes, chunks.carried, length, starts, ends, lines);
      // The unfinished line goes to the front of the other buffer, and the next read after it.
      chunks.carry(tail, length);
      reading = source.fill(chunks.current, chunks.carried);
      if (tail >= 0 && starts.length > 0) yield* numbering.ascii(bytes, starts, ends);
      else if (lines.length > 0) yield* numbering.text(lines);
      if (tooLong) {
        failure = new Error(`a line longer than ${guard.maxLine} bytes`);
        break;
      }
    }
    const rest = failure
      ? null
      : splitter.end(chunks.current.toString('latin1', 0, chunks.carried));
    if (rest !== null) yield* numbering.rest(rest);
  } catch (e) {
    failure ??= e as Error;
  } finally {
    // A read may still be under way (a fault, or a caller that stopped early): it ends with the source.
    await source?.close();
    await reading?.catch(() => 0);
  }
  if (failure) throw readFailure(path, o.gzip === true, failure, numbering.n);
  yield* numbering.final(lastByte === 10);
}

/** The lines of a file a chunk at a time, as text. */
export async function* readLineBatches(
  path: string,
  o: LineReadOptions = {},
): AsyncGenerator<TextLine[]> {
  for await (const batch of readLineBatchesRaw(path, o)) {
    if (Array.isArray(batch)) {
      yield batch;
      continue;
    }
    const { bytes, starts, ends, first } = batch;
    yield starts.map((start, k) => ({
      text: bytes.toString('latin1', start, ends[k]),
      number: first + k,
      terminated: true,
    }));
  }
}

export async function* readLines(path: string, o: LineReadOptions = {}): AsyncGenerator<TextLine> {
  for await (const batch of readLineBatches(path, o)) yield* batch;
}
