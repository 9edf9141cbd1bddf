import { Transform, type TransformCallback } from 'node:stream';
import { LineBuffer } from './line-buffer.js';

export interface LineSplitterOptions {
  /** Longest line kept; a longer run of bytes is dropped and reported. @default 256 */
  maxLength?: number;
  /** Called with the length of each dropped overlong run. */
  onOverlong?: (length: number) => void;
}

/**
 * Bytes in, lines out (object mode), as latin1 so any byte survives to the codec, which
 * rejects what is not printable. Memory is bounded by LineBuffer.
 */
export class LineSplitter extends Transform {
  private readonly lines: LineBuffer;

  constructor(options: LineSplitterOptions = {}) {
    super({ readableObjectMode: true });
    const onOverlong = options.onOverlong ?? (() => undefined);
    this.lines = new LineBuffer(options.maxLength ?? 256, (line) => this.push(line), onOverlong);
  }

  override _transform(chunk: Buffer, _enc: BufferEncoding, done: TransformCallback): void {
    this.lines.push(chunk.toString('latin1'));
    done();
  }
}
