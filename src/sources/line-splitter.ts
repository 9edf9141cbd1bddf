import { Transform, type TransformCallback } from 'node:stream';

export interface LineSplitterOptions {
  /** Longest line kept; a longer run of bytes is dropped and reported. @default 256 */
  maxLength?: number;
  /** Called with the length of each dropped overlong run. */
  onOverlong?: (length: number) => void;
}

/**
 * Splits bytes into lines on `\n`, as latin1 so any byte survives to the codec (which rejects
 * what is not printable). Written here rather than using a readline parser because that one
 * buffers without bound until it sees a delimiter: a rig spewing noise with no newline would
 * grow memory for as long as it does.
 */
export class LineSplitter extends Transform {
  private buffer = '';
  private dropping = 0;
  private readonly maxLength: number;
  private readonly onOverlong: (length: number) => void;

  constructor(options: LineSplitterOptions = {}) {
    super({ readableObjectMode: true });
    this.maxLength = options.maxLength ?? 256;
    this.onOverlong = options.onOverlong ?? (() => undefined);
  }

  override _transform(chunk: Buffer, _enc: BufferEncoding, done: TransformCallback): void {
    let text = chunk.toString('latin1');
    for (;;) {
      const nl = text.indexOf('\n');
      if (nl < 0) break;
      const part = text.slice(0, nl);
      text = text.slice(nl + 1);
      if (this.dropping > 0) {
        this.onOverlong(this.dropping + part.length);
        this.dropping = 0;
      } else if (this.buffer.length + part.length > this.maxLength) {
        this.onOverlong(this.buffer.length + part.length);
      } else {
        this.push(this.buffer + part);
      }
      this.buffer = '';
    }
    if (this.dropping > 0) {
      this.dropping += text.length;
    } else if (this.buffer.length + text.length > this.maxLength) {
      this.dropping = this.buffer.length + text.length;
      this.buffer = '';
    } else {
      this.buffer += text;
    }
    done();
  }
}
