/**
 * Lines of a text file, plain or gzip-compressed, streamed: memory stays bounded however long
 * the run was. The last line says whether it had its line end, so a row cut off
 * by an interrupted write can be told from a complete one.
 */
import { isAscii } from 'node:buffer';
import { createReadStream } from 'node:fs';
import type { Readable } from 'node:stream';
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
 * the first chunk that is not hands the rest of the file to a TextSplitter.
 */
class ByteSplitter {
  private partial: Buffer = Buffer.alloc(0);
  private sawReturn = false;
  private text: TextSplitter | null = null;

  /** The lines `chunk` completes: as places in the returned buffer, or as text once the file is not ASCII. */
  push(chunk: Buffer, starts: number[], ends: number[], textOut: string[]): Buffer | null {
    if (this.text === null && !isAscii(chunk)) this.text = new TextSplitter(this.partial.toString('latin1'), this.sawReturn);
    if (this.text !== null) {
      this.text.push(chunk, textOut);
      return null;
    }
    let data = chunk;
    if (this.sawReturn) {
      if (data[0] === 10) data = data.subarray(1);
      this.sawReturn = false;
    }
    const bytes = this.partial.length > 0 ? Buffer.concat([this.partial, data]) : data;
    let from = 0;
    let nl = bytes.indexOf(10);
    let cr = bytes.indexOf(13);
    for (;;) {
      if (nl >= 0 && (cr < 0 || nl < cr)) {
        starts.push(from);
        ends.push(nl);
        from = nl + 1;
        nl = bytes.indexOf(10, from);
      } else if (cr >= 0) {
        starts.push(from);
        ends.push(cr);
        from = bytes[cr + 1] === 10 ? cr + 2 : cr + 1;
        if (nl >= 0 && nl < from) nl = bytes.indexOf(10, from);
        cr = bytes.indexOf(13, from);
      } else {
        break;
      }
    }
    // A copy: the unfinished line outlives the chunk it came in.
    this.partial = Buffer.from(bytes.subarray(from));
    this.sawReturn = bytes.length > 0 && bytes[bytes.length - 1] === 13;
    return bytes;
  }

  end(): string | null {
    if (this.text !== null) return this.text.end();
    return this.partial.length > 0 ? this.partial.toString('latin1') : null;
  }
}

/**
 * The lines of a file a chunk at a time (about 64 KiB per batch), in order: the same lines,
 * numbers, `terminated` flags and errors as readLines (which is built on it). ASCII text comes
 * as AsciiLines, anything else as TextLine[].
 */
export async function* readLineBatchesRaw(path: string, o: LineReadOptions = {}): AsyncGenerator<LineBatch> {
  const maxLine = o.maxLineBytes ?? 1024 * 1024;
  const file = createReadStream(path);
  let failure: Error | null = null;
  const fail = (e: Error): void => {
    failure ??= e;
  };
  let text: Readable = file;
  if (o.gzip) {
    const gunzip = createGunzip();
    // A file that fails under gunzip would leave it waiting for more input forever.
    file.on('error', (e) => gunzip.destroy(e));
    text = file.pipe(gunzip);
    if (o.onBytes) file.on('data', (chunk) => o.onBytes!(chunk.length));
  }
  const splitter = new ByteSplitter();
  const starts: number[] = [];
  const ends: number[] = [];
  const lines: string[] = [];
  let lastByte = -1;
  let sinceNewline = 0;
  // A line is passed on once the next one is known, so the last one is known to be last.
  let held: { text: string; number: number } | null = null;
  let n = 0;
  try {
    for await (const chunk of text as AsyncIterable<Buffer>) {
      if (!o.gzip) o.onBytes?.(chunk.length);
      lastByte = chunk[chunk.length - 1] ?? lastByte;
      let longest = 0;
      // No line can be longer than what came since the last line end; only when that could
      // pass the limit are the line ends looked for here.
      if (sinceNewline + chunk.length > maxLine) {
        let from = 0;
        for (let nl = chunk.indexOf(10); nl >= 0; nl = chunk.indexOf(10, from)) {
          longest = Math.max(longest, (from === 0 ? sinceNewline : 0) + nl - from);
          from = nl + 1;
        }
        sinceNewline = (from === 0 ? sinceNewline : 0) + chunk.length - from;
      } else {
        const nl = chunk.lastIndexOf(10);
        sinceNewline = nl < 0 ? sinceNewline + chunk.length : chunk.length - nl - 1;
      }
      starts.length = 0;
      ends.length = 0;
      lines.length = 0;
      const bytes = splitter.push(chunk, starts, ends, lines);
      if (bytes !== null && starts.length > 0) {
        if (held) yield [{ ...held, terminated: true }];
        const last = starts.length - 1;
        held = { text: bytes.toString('latin1', starts[last], ends[last]), number: n + starts.length };
        if (last > 0) yield { bytes, starts: starts.slice(0, last), ends: ends.slice(0, last), first: n + 1 };
        n += starts.length;
      } else if (lines.length > 0) {
        const batch: TextLine[] = [];
        if (held) batch.push({ ...held, terminated: true });
        for (let k = 0; k < lines.length - 1; k++) batch.push({ text: lines[k]!, number: ++n, terminated: true });
        held = { text: lines[lines.length - 1]!, number: ++n };
        yield batch;
      }
      if (Math.max(longest, sinceNewline) > maxLine) {
        fail(new Error(`a line longer than ${maxLine} bytes`));
        break;
      }
    }
    const rest = failure ? null : splitter.end();
    if (rest !== null) {
      if (held) yield [{ ...held, terminated: true }];
      held = { text: rest, number: ++n };
    }
  } catch (e) {
    fail(e as Error);
  } finally {
    text.destroy();
    file.destroy();
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
export async function* readLineBatches(path: string, o: LineReadOptions = {}): AsyncGenerator<TextLine[]> {
  for await (const batch of readLineBatchesRaw(path, o)) {
    if (Array.isArray(batch)) {
      yield batch;
      continue;
    }
    const { bytes, starts, ends, first } = batch;
    yield starts.map((start, k) => ({ text: bytes.toString('latin1', start, ends[k]), number: first + k, terminated: true }));
  }
}

export async function* readLines(path: string, o: LineReadOptions = {}): AsyncGenerator<TextLine> {
  for await (const batch of readLineBatches(path, o)) yield* batch;
}
