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
 * The lines of a file a chunk at a time (READ_CHUNK_BYTES of the file per batch), in order:
 * the same lines, numbers, `terminated` flags and errors as readLines (which is built on it).
 * ASCII text comes as AsciiLines, anything else as TextLine[]. An AsciiLines batch's bytes are
 * the reader's own buffer: they hold until the next batch is asked for, and are reused after.
 */
export async function* readLineBatchesRaw(
  path: string,
  o: LineReadOptions = {},
): AsyncGenerator<LineBatch> {
  const maxLine = o.maxLineBytes ?? 1024 * 1024;
  let failure: Error | null = null;
  const fail = (e: Error): void => {
    failure ??= e;
  };
  const splitter = new ByteSplitter();
  const starts: number[] = [];
  const ends: number[] = [];
  const lines: string[] = [];
  let lastByte = -1;
  let sinceNewline = 0;
  // A line is passed on once the next one is known, so the last one is known to be last.
  let held: { text: string; number: number } | null = null;
  let n = 0;
  // Two buffers taken in turn: the next chunk is read into one while the lines of the other
  // are worked on. Each has room for the unfinished line carried over in front of a chunk.
  const buffers = [Buffer.allocUnsafe(2 * CHUNK), Buffer.allocUnsafe(2 * CHUNK)];
  let current = 0;
  let carried = 0;
  let source: ByteSource | null = null;
  let reading: Promise<number> | null = null;
  try {
    source = o.gzip ? gzipSource(path, o.onBytes) : await plainSource(path, o.onBytes);
    reading = source.fill(buffers[0]!, 0);
    for (;;) {
      const got = await reading;
      if (got === 0) break;
      const bytes = buffers[current]!;
      const length = carried + got;
      lastByte = bytes[length - 1]!;
      let longest = 0;
      // No line can be longer than what came since the last line end; only when that could
      // pass the limit are the line ends looked for here.
      if (sinceNewline + got > maxLine) {
        let from = carried;
        const data = bytes.subarray(0, length);
        for (let nl = data.indexOf(10, from); nl >= 0; nl = data.indexOf(10, from)) {
          longest = Math.max(longest, (from === carried ? sinceNewline : 0) + nl - from);
          from = nl + 1;
        }
        sinceNewline = (from === carried ? sinceNewline : 0) + length - from;
      } else {
        const nl = bytes.lastIndexOf(10, length - 1);
        sinceNewline = nl < carried ? sinceNewline + got : length - nl - 1;
      }
      starts.length = 0;
      ends.length = 0;
      lines.length = 0;
      const tail = splitter.push(bytes, carried, length, starts, ends, lines);
      // The unfinished line goes to the front of the other buffer, and the next read after it.
      current ^= 1;
      carried = tail < 0 ? 0 : length - tail;
      if (carried + CHUNK > buffers[current]!.length)
        buffers[current] = Buffer.allocUnsafe(carried + CHUNK);
      if (carried > 0) bytes.copy(buffers[current]!, 0, tail, length);
      reading = source.fill(buffers[current]!, carried);
      if (tail >= 0 && starts.length > 0) {
        if (held) yield [{ ...held, terminated: true }];
        const last = starts.length - 1;
        held = {
          text: bytes.toString('latin1', starts[last], ends[last]),
          number: n + starts.length,
        };
        if (last > 0)
          yield { bytes, starts: starts.slice(0, last), ends: ends.slice(0, last), first: n + 1 };
        n += starts.length;
      } else if (lines.length > 0) {
        const batch: TextLine[] = [];
        if (held) batch.push({ ...held, terminated: true });
        for (let k = 0; k < lines.length - 1; k++)
          batch.push({ text: lines[k]!, number: ++n, terminated: true });
        held = { text: lines[lines.length - 1]!, number: ++n };
        yield batch;
      }
      if (Math.max(longest, sinceNewline) > maxLine) {
        fail(new Error(`a line longer than ${maxLine} bytes`));
        break;
      }
    }
    const rest = failure ? null : splitter.end(buffers[current]!.toString('latin1', 0, carried));
    if (rest !== null) {
      if (held) yield [{ ...held, terminated: true }];
      held = { text: rest, number: ++n };
    }
  } catch (e) {
    fail(e as Error);
  } finally {
    // A read may still be under way (a fault, or a caller that stopped early): it ends with the source.
    await source?.close();
    await reading?.catch(() => 0);
  }
  if (failure) {
    const f = failure as Error;
    const gz = o.gzip && /unexpected end|incorrect header|invalid/i.test(f.message);
    throw makeError(
      ErrorCodes.RUN_DATA,
      `cannot read ${gz ? 'the compressed file' : 'the file'}: ${f.message}`,
      `${path}${n > 0 ? ` after line ${n}` : ''}`,
      gz
        ? 'The gzip file is damaged or incomplete; restore it, or decompress what can be saved (zcat) into the .csv of the same number.'
        : 'Check that the file is readable and is the file the run wrote.',
    );
  }
  if (held) yield [{ ...held, terminated: lastByte === 10 }];
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
