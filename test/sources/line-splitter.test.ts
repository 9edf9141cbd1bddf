import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeRigLine, encodeDataFrame } from '../../src/protocol/codec.js';
import { LineSplitter } from '../../src/sources/line-splitter.js';

/** Pushes byte chunks through a splitter synchronously; returns the lines and overlong reports. */
function split(
  chunks: readonly Buffer[],
  maxLength = 256,
): { lines: string[]; overlong: number[]; splitter: LineSplitter } {
  const lines: string[] = [];
  const overlong: number[] = [];
  const splitter = new LineSplitter({
    maxLength,
    onLine: (l) => lines.push(l),
    onOverlong: (n) => overlong.push(n),
  });
  for (const c of chunks) splitter.write(c);
  return { lines, overlong, splitter };
}

/** Cuts a byte string at the given (sorted, deduplicated) positions. */
function cut(bytes: Buffer, at: readonly number[]): Buffer[] {
  const points = [...new Set(at.map((p) => p % (bytes.length + 1)))].sort((a, b) => a - b);
  const out: Buffer[] = [];
  let from = 0;
  for (const p of points) {
    out.push(bytes.subarray(from, p));
    from = p;
  }
  out.push(bytes.subarray(from));
  return out;
}

/** Characters held back by the splitter: its partial line must stay within maxLength. */
function held(splitter: LineSplitter): number {
  const inner = Reflect.get(splitter, 'lines') as object;
  return (Reflect.get(inner, 'buffer') as string).length;
}

const lineText = fc.string({
  unit: fc
    .integer({ min: 0, max: 255 })
    .filter((b) => b !== 10)
    .map((b) => String.fromCharCode(b)),
  maxLength: 80,
});

describe('LineSplitter', () => {
  it('lines cut into chunks anywhere come out whole and in order (property)', () => {
    fc.assert(
      fc.property(
        fc.array(lineText, { maxLength: 20 }),
        fc.array(fc.nat(), { maxLength: 30 }),
        (lines, at) => {
          const bytes = Buffer.from(lines.map((l) => `${l}\n`).join(''), 'latin1');
          const out = split(cut(bytes, at));
          expect(out.lines).toEqual(lines);
          expect(out.overlong).toEqual([]);
        },
      ),
      { numRuns: 3000 },
    );
  });

  it('a line cut one byte at a time comes out whole', () => {
    const bytes = Buffer.from('D,0,1,2,3,4,5,01|ABCD\nsecond\n', 'latin1');
    const out = split(Array.from(bytes, (b) => Buffer.from([b])));
    expect(out.lines).toEqual(['D,0,1,2,3,4,5,01|ABCD', 'second']);
  });

  it('\\r\\n line ends: the \\r stays for the codec, which tolerates it (protocol v1)', () => {
    const frame = encodeDataFrame({
      channel: 0,
      seq: 7,
      tickMs: 700,
      vRaw: 2400,
      iRaw: 1500,
      tRaw: 2048,
      flags: 1,
    }).trimEnd();
    const out = split(
      cut(Buffer.from(`${frame}\r\n${frame}\r\n`, 'latin1'), [frame.length, frame.length + 1]),
    );
    expect(out.lines).toEqual([`${frame}\r`, `${frame}\r`]);
    for (const l of out.lines) expect(decodeRigLine(l, 12).ok).toBe(true);
  });

  it('bytes above 0x7f pass through as latin1 (one char per byte) for the codec to reject', () => {
    const out = split([Buffer.from([0x41, 0xff, 0x00, 0x80, 0x0a])]);
    expect(out.lines).toEqual(['A\xff\x00\x80']);
    expect(decodeRigLine(out.lines[0]!)).toMatchObject({ ok: false, reason: 'not_text' });
  });

  it('a line of exactly maxLength is kept; one character more is reported and dropped', () => {
    const out = split([Buffer.from(`${'a'.repeat(16)}\n${'b'.repeat(17)}\nok\n`)], 16);
    expect(out.lines).toEqual(['a'.repeat(16), 'ok']);
    expect(out.overlong).toEqual([17]);
  });

  it('noise without newlines is dropped as it comes: memory stays bounded, and the next line is clean', () => {
    const maxLength = 256;
    const lines: string[] = [];
    const overlong: number[] = [];
    const splitter = new LineSplitter({
      maxLength,
      onLine: (l) => lines.push(l),
      onOverlong: (n) => overlong.push(n),
    });
    const noise = Buffer.alloc(4096, 0x55); // 'U', no newline
    let maxHeld = 0;
    for (let k = 0; k < 2000; k++) {
      // about 8 MB in total
      splitter.write(noise);
      maxHeld = Math.max(maxHeld, held(splitter));
    }
    splitter.write(Buffer.from('tail\nH,rig,1,12,1|0000\n'));
    expect(maxHeld).toBeLessThanOrEqual(maxLength);
    expect(overlong).toEqual([2000 * 4096 + 'tail'.length]);
    expect(lines).toEqual(['H,rig,1,12,1|0000']);
  });

  it('overlong runs between good lines are each reported once (property)', () => {
    fc.assert(
      fc.property(
        fc.array(
          fc.oneof(
            fc.string({ unit: fc.constantFrom('a', 'b', ','), maxLength: 32 }),
            fc.integer({ min: 33, max: 300 }),
          ),
          { maxLength: 15 },
        ),
        fc.array(fc.nat(), { maxLength: 20 }),
        (items, at) => {
          // strings are good lines, numbers the lengths of overlong ones
          const text = items
            .map((x) => (typeof x === 'string' ? x : 'z'.repeat(x)))
            .map((l) => `${l}\n`)
            .join('');
          const out = split(cut(Buffer.from(text, 'latin1'), at), 32);
          expect(out.lines).toEqual(items.filter((x) => typeof x === 'string'));
          expect(out.overlong).toEqual(items.filter((x) => typeof x === 'number'));
          expect(held(out.splitter)).toBeLessThanOrEqual(32);
        },
      ),
      { numRuns: 2000 },
    );
  });

  it('hands every line over before write returns: nothing queues between the port and the core', () => {
    const got: string[] = [];
    const splitter = new LineSplitter({ onLine: (l) => got.push(l) });
    const n = 20_000;
    const bytes = Buffer.from(Array.from({ length: n }, (_, k) => `line ${k}\n`).join(''));
    for (let k = 0; k < bytes.length; k += 1000) {
      splitter.write(bytes.subarray(k, k + 1000));
      // Every complete line in the bytes written so far has been delivered already.
      const complete =
        bytes
          .subarray(0, Math.min(k + 1000, bytes.length))
          .toString('latin1')
          .split('\n').length - 1;
      expect(got.length).toBe(complete);
    }
    expect(got).toEqual(Array.from({ length: n }, (_, k) => `line ${k}`));
  });
});
