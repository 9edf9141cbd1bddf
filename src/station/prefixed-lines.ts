import { Writable } from 'node:stream';

/**
 * A channel's own output (its cautions, state changes, summary) as whole lines, each
 * prefixed with the channel, so the lines of a station's channels can share one terminal.
 * Not a terminal itself: a channel's status is printed now and then, never redrawn in place.
 */
export function prefixedLines(prefix: string, print: (line: string) => void): Writable {
  let partial = '';
  return new Writable({
    decodeStrings: false,
    write(chunk: string | Buffer, _enc, done) {
      const parts = (partial + chunk.toString()).split('\n');
      partial = parts.pop() ?? '';
      for (const p of parts) if (p.trim() !== '') print(`${prefix} ${p}`);
      done();
    },
    final(done) {
      if (partial.trim() !== '') print(`${prefix} ${partial}`);
      partial = '';
      done();
    },
  });
}
