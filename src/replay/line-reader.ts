/**
 * Lines of a text file, plain or gzip-compressed, streamed with readline: memory stays bounded
 * however long the run was. The last line says whether it had its line end, so a row cut off
 * by an interrupted write can be told from a complete one.
 */
import { createReadStream } from 'node:fs';
import { createInterface } from 'node:readline';
import type { Readable } from 'node:stream';
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

export async function* readLines(path: string, o: LineReadOptions = {}): AsyncGenerator<TextLine> {
  const maxLine = o.maxLineBytes ?? 1024 * 1024;
  const file = createReadStream(path);
  let failure: Error | null = null;
  const fail = (e: Error): void => {
    failure ??= e;
  };
  file.on('error', fail);
  if (o.onBytes) file.on('data', (chunk) => o.onBytes!(chunk.length));
  let text: Readable = file;
  if (o.gzip) {
    const gunzip = createGunzip();
    gunzip.on('error', fail);
    text = file.pipe(gunzip);
  }
  let lastByte = -1;
  let sinceNewline = 0;
  text.on('data', (chunk: Buffer) => {
    lastByte = chunk[chunk.length - 1] ?? lastByte;
    let longest = 0;
    let from = 0;
    for (let nl = chunk.indexOf(10); nl >= 0; nl = chunk.indexOf(10, from)) {
      longest = Math.max(longest, (from === 0 ? sinceNewline : 0) + nl - from);
      from = nl + 1;
    }
    sinceNewline = (from === 0 ? sinceNewline : 0) + chunk.length - from;
    if (Math.max(longest, sinceNewline) > maxLine) {
      const e = new Error(`a line longer than ${maxLine} bytes`);
      fail(e);
      // Destroyed with the error, readline ends the iteration with it instead of waiting forever.
      text.destroy(e);
    }
  });
  const rl = createInterface({ input: text, crlfDelay: Infinity });
  // A line is yielded once the next one arrives, so the last one is known to be last.
  let held: { text: string; number: number } | null = null;
  let n = 0;
  try {
    for await (const line of rl) {
      if (held) yield { ...held, terminated: true };
      held = { text: line, number: ++n };
    }
  } catch (e) {
    fail(e as Error);
  } finally {
    rl.close();
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
  if (held) yield { ...held, terminated: lastByte === 10 };
}
