/**
 * Splits text into lines on `\n`, synchronously, keeping at most `maxLength` characters of an
 * unfinished line. Written here rather than using a readline parser because that one buffers
 * without bound until it sees a delimiter: a rig spewing noise with no newline would grow
 * memory for as long as it does.
 */
export class LineBuffer {
  private buffer = '';
  /** Length of the overlong run being discarded, 0 when not discarding. */
  private dropping = 0;

  constructor(
    private readonly maxLength: number,
    private readonly onLine: (line: string) => void,
    private readonly onOverlong: (length: number) => void,
  ) {}

  push(text: string): void {
    let start = 0;
    for (;;) {
      const nl = text.indexOf('\n', start);
      if (nl < 0) break;
      const partLength = nl - start;
      if (this.dropping > 0) {
        this.onOverlong(this.dropping + partLength);
        this.dropping = 0;
      } else if (this.buffer.length + partLength > this.maxLength) {
        this.onOverlong(this.buffer.length + partLength);
      } else {
        const line = this.buffer + text.slice(start, nl);
        this.buffer = '';
        this.onLine(line);
      }
      this.buffer = '';
      start = nl + 1;
    }
    const restLength = text.length - start;
    if (this.dropping > 0) {
      this.dropping += restLength;
    } else if (this.buffer.length + restLength > this.maxLength) {
      this.dropping = this.buffer.length + restLength;
      this.buffer = '';
    } else if (restLength > 0) {
      this.buffer += text.slice(start);
    }
  }
}
