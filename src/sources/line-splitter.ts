import { LineBuffer } from './line-buffer.js';

export interface LineSplitterOptions {
  /** Longest line kept; a longer run of bytes is dropped and reported. @default 256 */
  maxLength?: number;
  /** Called with each line, without its `\n`, before `write` returns. */
  onLine: (line: string) => void;
  /** Called with the length of each dropped overlong run. */
  onOverlong?: (length: number) => void;
}

/**
 * Bytes in, lines out, as latin1 so any byte survives to the codec, which rejects what is not
 * printable. Synchronous rather than an object-mode stream: every line reaches the pipeline
 * before the next chunk is read, so nothing queues between the port and the core, and a burst
 * of a hundred lines costs one call rather than a hundred stream pushes. Memory is bounded by
 * LineBuffer.
 */
export class LineSplitter {
  private readonly lines: LineBuffer;

  constructor(options: LineSplitterOptions) {
    this.lines = new LineBuffer(
      options.maxLength ?? 256,
      options.onLine,
      options.onOverlong ?? (() => undefined),
    );
  }

  write(chunk: Buffer): void {
    this.lines.push(chunk.toString('latin1'));
  }
}
