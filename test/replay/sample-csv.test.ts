import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { SampleLineError, SampleReader, type SampleRecord } from '../../src/replay/sample-csv.js';

/**
 * A sample-row reader written from docs/run-folder.md (the columns and their formats) with
 * plain split and regular expressions, and ECMAScript's Number and Date.parse for the values:
 * the product's reader must give the same record for every row it accepts and refuse every
 * row this one refuses.
 */
function rfc4180Fields(line: string): string[] | null {
  // RFC 4180 section 2: a field is either plain (no quote, no comma) or quoted, with "" for a quote.
  const fields: string[] = [];
  const re = /(?:"((?:[^"]|"")*)"|([^,"]*))(,|$)/y;
  for (;;) {
    const m = re.exec(line);
    if (m === null) return null;
    fields.push(m[1] !== undefined ? m[1].replace(/""/g, '"') : m[2]!);
    if (m[3] === '') return re.lastIndex === line.length ? fields : null;
  }
}

function reference(line: string): SampleRecord | null {
  const f = rfc4180Fields(line);
  if (f === null || f.length !== 16) return null;
  const dec = /^-?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
  const num = (x: string, empty: boolean): number | null =>
    x === '' && empty ? Number.NaN : dec.test(x) ? Number(x) : null;
  const whole = (x: string, max: number): number | null =>
    /^\d+$/.test(x) && Number(x) <= max ? Number(x) : null;
  const r = {
    hostS: num(f[0]!, false),
    wallTime: Number.isFinite(Date.parse(f[1]!)) ? f[1]! : null,
    channel: whole(f[2]!, 15),
    seq: whole(f[3]!, 65535),
    tickMs: whole(f[4]!, 2 ** 32 - 1),
    vRaw: whole(f[5]!, 2 ** 24 - 1),
    iRaw: whole(f[6]!, 2 ** 24 - 1),
    tRaw: whole(f[7]!, 2 ** 24 - 1),
    flags: /^[0-9A-Fa-f]{1,2}$/.test(f[8]!) ? parseInt(f[8]!, 16) : null,
    volts: num(f[9]!, true),
    amps: num(f[10]!, true),
    celsius: num(f[11]!, true),
    chargeAh: num(f[12]!, false),
    energyWh: num(f[13]!, false),
    state: ['waiting', 'precheck', 'starting', 'discharging', 'stopping', 'ended'].includes(f[14]!)
      ? f[14]!
      : null,
    calibrationId: /^(none|[0-9a-f]{16})$/.test(f[15]!) ? f[15]! : null,
  };
  return Object.values(r).some((v) => v === null) ? null : (r as SampleRecord);
}

/** Mostly well-formed values, now and then an odd one: most rows pass, so values get compared. */
const mostly = <T>(good: fc.Arbitrary<T>, odd: fc.Arbitrary<T>): fc.Arbitrary<T> =>
  fc.oneof({ weight: 12, arbitrary: good }, { weight: 1, arbitrary: odd });
const decimalText = mostly(
  fc.oneof(
    fc
      .double({ min: -50, max: 1e6, noNaN: true })
      .chain((x) => fc.constantFrom(x.toFixed(3), x.toFixed(5), x.toFixed(7), String(x))),
    fc.stringMatching(/^-?[0-9]{1,12}\.[0-9]{1,8}$/),
  ),
  fc.oneof(
    fc.stringMatching(/^-?[0-9]{1,20}(\.[0-9]{0,20})?$/),
    fc.constantFrom(
      '5.',
      '.5',
      '-.5',
      '1.2.3',
      '1e3',
      '-0',
      '-0.0',
      '007.50',
      '',
      '-',
      '.',
      'nan',
      '0x10',
      ' 1',
      '1,5',
    ),
  ),
);
const wall = mostly(
  fc.integer({ min: 0, max: 253_402_300_799_999 }).map((ms) => new Date(ms).toISOString()),
  fc.constantFrom(
    '2026-02-30T10:00:00.000Z',
    '2026-11-14T24:00:00.000Z',
    '2026-11-14T23:59:60.000Z',
    '2026-11-14T07:30:00Z',
    '2026-11-14 07:30:00.000Z',
    '2026-13-01T00:00:00.000Z',
    '+012026-01-01T00:00:00.000Z',
    'yesterday',
    '',
  ),
);
const whole = mostly(
  fc.integer({ min: 0, max: 4095 }).map(String),
  fc.oneof(
    fc.stringMatching(/^[0-9]{1,14}$/),
    fc.constantFrom('', '-1', '1.0', '4294967295', '4294967296', '16777216'),
  ),
);
const flags = mostly(
  fc.stringMatching(/^[0-9A-Fa-f]{1,2}$/),
  fc.constantFrom('', '001', 'g', ' 1'),
);
const state = mostly(
  fc.constantFrom('waiting', 'precheck', 'starting', 'discharging', 'stopping', 'ended'),
  fc.constantFrom('Ended', 'discharge', ''),
);
const id = mostly(
  fc.oneof(fc.constant('none'), fc.stringMatching(/^[0-9a-f]{16}$/)),
  fc.constantFrom('None', '0123456789ABCDEF', '0123', ''),
);
const row = fc.tuple(
  decimalText,
  wall,
  whole,
  whole,
  whole,
  whole,
  whole,
  whole,
  flags,
  decimalText,
  decimalText,
  decimalText,
  decimalText,
  decimalText,
  state,
  id,
);
const line = fc.oneof(
  { weight: 9, arbitrary: row.map((f) => f.join(',')) },
  {
    weight: 1,
    arbitrary: fc
      .tuple(row, fc.integer({ min: 0, max: 15 }), fc.constantFrom('', 'x', '"1"', '1,2'))
      .map(([f, k, extra]) => f.map((x, j) => (j === k ? extra : x)).join(',')),
  },
);
const goodRow = (hostS: string, wallTime: string): string =>
  `${hostS},${wallTime},0,1,50,2450,80,2100,01,4.02000,,24.50,0.0000017,0.0000068,discharging,none`;

describe('sample rows: the reader agrees with a reader written from docs/run-folder.md', () => {
  it('on rows as the daemon writes them and on every kind of damaged field', () => {
    const reader = new SampleReader();
    fc.assert(
      fc.property(line, (text) => {
        const want = reference(text);
        if (want === null) expect(() => reader.parseLine(text)).toThrow(SampleLineError);
        else expect(reader.parseLine(text)).toEqual(want);
      }),
      { numRuns: 30_000 },
    );
  });

  it('on decimals of 16 to 20 digits, which a double cannot build digit by digit', () => {
    const reader = new SampleReader();
    fc.assert(
      fc.property(
        fc.stringMatching(/^[0-9]{16,20}$/),
        fc.integer({ min: 1, max: 15 }),
        (digits, p) => {
          const text = goodRow(
            `${digits.slice(0, p)}.${digits.slice(p)}`,
            '2026-11-14T07:30:00.050Z',
          );
          expect(reader.parseLine(text)).toEqual(reference(text));
        },
      ),
      { numRuns: 2000 },
    );
  });

  it('an empty or changed calibration id is judged afresh, whatever the row before had', () => {
    const reader = new SampleReader();
    const row = (id: string): string =>
      `${goodRow('1.000', '2026-11-14T07:30:00.050Z').replace(/,none$/, ',')}${id}`;
    expect(reader.parseLine(row('none')).calibrationId).toBe('none');
    expect(() => reader.parseLine(row(''))).toThrow(SampleLineError);
    expect(() => reader.parseLine(row('nonE'))).toThrow(SampleLineError);
    expect(reader.parseLine(row('00ff00ff00ff00ff')).calibrationId).toBe('00ff00ff00ff00ff');
    expect(() => reader.parseLine(row('00ff00ff00ff00fg'))).toThrow(SampleLineError);
  });

  it('a valid hour 24:00 does not make 24:30 valid', () => {
    const reader = new SampleReader();
    expect(reader.parseLine(goodRow('1.000', '2026-11-14T24:00:00.000Z')).wallTime).toBe(
      '2026-11-14T24:00:00.000Z',
    );
    expect(() => reader.parseLine(goodRow('1.050', '2026-11-14T24:30:00.000Z'))).toThrow(
      SampleLineError,
    );
  });

  it('on a day of rows across an hour change, the calibration id changing mid-way', () => {
    const reader = new SampleReader();
    for (let i = 0; i < 5000; i++) {
      const t = new Date(Date.UTC(2026, 11, 31, 22, 59, 50) + i * 50).toISOString();
      const cal = i < 2500 ? 'none' : '00ff00ff00ff00ff';
      const text = `${(i * 0.05).toFixed(3)},${t},0,${i % 65536},${i * 50},2450,80,2100,01,4.02000,,24.50,${(i * 1.7e-6).toFixed(7)},${(i * 6.8e-6).toFixed(7)},discharging,${cal}`;
      expect(reader.parseLine(text)).toEqual(reference(text));
    }
  });

  it('two readers taken in turn, on files of other hours and ids, each agree with the reference', () => {
    const readers = [new SampleReader(), new SampleReader()];
    const files = [
      { start: Date.UTC(2026, 11, 31, 22, 59, 58), cal: 'none', state: 'discharging' },
      { start: Date.UTC(2027, 0, 2, 5, 0, 0), cal: '00ff00ff00ff00ff', state: 'stopping' },
    ];
    for (let i = 0; i < 200; i++) {
      for (const [k, f] of files.entries()) {
        const t = new Date(f.start + i * 50).toISOString();
        const text = `${(i * 0.05).toFixed(3)},${t},${k},${i},${i * 50},2450,80,2100,01,4.02000,,24.50,0.0000017,0.0000068,${f.state},${f.cal}`;
        expect(readers[k]!.parseLine(text)).toEqual(reference(text));
      }
    }
  });
});
