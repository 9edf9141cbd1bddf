import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { writeFixed, writeText, writeUint } from '../../src/sinks/ascii-writer.js';
import { IsoTimeWriter } from '../../src/sinks/iso-time.js';
import { formatSampleRow, SampleRowWriter, type SampleRow } from '../../src/sinks/sample-row.js';

/** What writeFixed puts in a buffer, as text. */
function fixedDecimal(x: number, digits: number): string {
  const buf = Buffer.alloc(400);
  return buf.toString('utf8', 0, writeFixed(buf, 0, x, digits));
}

// The reference for every check here is the ECMAScript standard library itself (ECMA-262
// Number.prototype.toFixed and Date.prototype.toISOString, as the engine implements them): the
// fast formatters must give exactly the same text for every input.

describe('writeFixed writes the text of Number.prototype.toFixed (ECMA-262)', () => {
  it('on any double and 0..9 digits', () => {
    fc.assert(
      fc.property(fc.double(), fc.integer({ min: 0, max: 9 }), (x, d) => {
        expect(fixedDecimal(x, d)).toBe(x.toFixed(d));
      }),
      { numRuns: 20_000 },
    );
  });

  it('on values the sample log writes (volts, amps, seconds, ampere-hours) and on exact and near halves', () => {
    const halves = fc
      .tuple(
        fc.integer({ min: -1_000_000, max: 1_000_000 }),
        fc.integer({ min: 0, max: 7 }),
        fc.integer({ min: -3, max: 3 }),
      )
      .map(([n, d, ulps]) => {
        let x = (n + 0.5) / 10 ** d;
        for (let k = 0; k < Math.abs(ulps); k++)
          x = ulps > 0 ? x + Number.EPSILON * Math.abs(x) : x - Number.EPSILON * Math.abs(x);
        return [x, d] as const;
      });
    const logged = fc.tuple(
      fc.double({ min: -20, max: 100_000, noNaN: true }),
      fc.constantFrom(2, 3, 5, 7),
    );
    fc.assert(
      fc.property(fc.oneof(halves, logged), ([x, d]) => {
        expect(fixedDecimal(x, d)).toBe(x.toFixed(d));
      }),
      { numRuns: 50_000 },
    );
  });

  it('keeps the sign of small negatives and drops the sign of negative zero, as toFixed does', () => {
    for (const [x, d] of [
      [-0.0001, 2],
      [-0, 3],
      [0.5, 0],
      [2.5, 0],
      [1.005, 2],
      [-1.5, 0],
      [1e21, 2],
      [NaN, 2],
      [-Infinity, 1],
    ] as const) {
      expect(fixedDecimal(x, d)).toBe(x.toFixed(d));
    }
  });
});

describe('writeUint and writeText write the text of String(n) and of the string itself', () => {
  it('on whole numbers from 0 to 2^53 - 1', () => {
    fc.assert(
      fc.property(fc.oneof(fc.integer({ min: 0, max: 99_999 }), fc.maxSafeNat()), (n) => {
        const buf = Buffer.alloc(32);
        expect(buf.toString('latin1', 0, writeUint(buf, 0, n))).toBe(String(n));
      }),
      { numRuns: 20_000 },
    );
  });

  it('ASCII byte for byte, anything wider as UTF-8', () => {
    for (const text of ['', 'discharging', 'cal-2026-11-20', 'Zelle Nr. 3 – 25 °C']) {
      const buf = Buffer.alloc(3 * text.length + 2, 0x7e);
      const end = writeText(buf, 1, text);
      expect(buf.toString('utf8', 1, end)).toBe(text);
      expect(end - 1).toBe(Buffer.byteLength(text));
    }
  });
});

/** One writer for every call, as a log has: its kept hour must never leak into another time. */
const timeWriter = new IsoTimeWriter();

/** What the writer puts in a buffer (not at its start), as text. */
function isoTime(ms: number): string {
  const buf = Buffer.alloc(40);
  return buf.toString('latin1', 3, timeWriter.write(buf, 3, ms));
}

describe('IsoTimeWriter writes the text of Date.prototype.toISOString (ECMA-262)', () => {
  it('on any time from 1970 to 9999, whole or not, in any order', () => {
    fc.assert(
      fc.property(
        fc.oneof(
          fc.integer({ min: 0, max: 253_402_300_799_999 }),
          fc.double({ min: 0, max: 4e12, noNaN: true }),
        ),
        (ms) => {
          expect(isoTime(ms)).toBe(new Date(ms).toISOString());
        },
      ),
      { numRuns: 20_000 },
    );
  });

  it('across hour, day and year boundaries, and before 1970', () => {
    const base = Date.UTC(2026, 11, 31, 23, 59, 59, 990);
    for (let ms = base - 50; ms < base + 50; ms++)
      expect(isoTime(ms)).toBe(new Date(ms).toISOString());
    for (const ms of [
      -1,
      -86_400_001,
      Date.UTC(2028, 1, 29, 12),
      253_402_300_799_999,
      253_402_300_800_000,
      253_402_304_400_007,
    ])
      expect(isoTime(ms)).toBe(new Date(ms).toISOString());
    expect(() => isoTime(Number.NaN)).toThrow(RangeError);
  });
});

describe('formatSampleRow', () => {
  // The column formats of docs/run-folder.md, built with the standard library's own formatters.
  const reference = (r: SampleRow): string => {
    const num = (x: number, digits: number): string =>
      Number.isFinite(x) ? x.toFixed(digits) : '';
    return [
      r.hostS.toFixed(3),
      new Date(r.wallMs).toISOString(),
      r.channel,
      r.seq,
      r.tickMs,
      r.vRaw,
      r.iRaw,
      r.tRaw,
      r.flags.toString(16).toUpperCase().padStart(2, '0'),
      num(r.volts, 5),
      num(r.amps, 5),
      num(r.celsius, 2),
      r.chargeAh.toFixed(7),
      r.energyWh.toFixed(7),
      r.state,
      r.calibrationId,
    ].join(',');
  };
  const reading = fc.oneof(fc.double({ min: -5, max: 100, noNaN: true }), fc.constant(Number.NaN));
  const row = fc.record({
    hostS: fc.double({ min: 0, max: 1e7, noNaN: true }),
    wallMs: fc.integer({ min: 1_600_000_000_000, max: 2_000_000_000_000 }),
    channel: fc.integer({ min: 0, max: 15 }),
    seq: fc.integer({ min: 0, max: 65535 }),
    tickMs: fc.integer({ min: 0, max: 2 ** 32 - 1 }),
    vRaw: fc.integer({ min: 0, max: 65535 }),
    iRaw: fc.integer({ min: 0, max: 65535 }),
    tRaw: fc.integer({ min: 0, max: 65535 }),
    flags: fc.integer({ min: 0, max: 255 }),
    volts: reading,
    amps: reading,
    celsius: reading,
    chargeAh: fc.double({ min: 0, max: 1000, noNaN: true }),
    energyWh: fc.double({ min: 0, max: 5000, noNaN: true }),
    state: fc.constantFrom('waiting', 'precheck', 'starting', 'discharging', 'stopping', 'ended'),
    calibrationId: fc.constantFrom('none', '0123456789abcdef'),
  });

  it('writes the same text as the column formats built with toFixed and toISOString', () => {
    fc.assert(
      fc.property(row, (r) => {
        expect(formatSampleRow(r)).toBe(reference(r));
      }),
      { numRuns: 5_000 },
    );
  });

  it('one writer over many rows (its kept hour, state and id reused or replaced) writes the same', () => {
    const writer = new SampleRowWriter();
    const buf = Buffer.alloc(1024);
    fc.assert(
      fc.property(row, (r) => {
        const end = writer.write(r, buf, 0);
        expect(buf.toString('utf8', 0, end)).toBe(`${reference(r)}\n`);
      }),
      { numRuns: 5_000 },
    );
  });
});
