/**
 * Rows of samples-NNNN.csv (docs/run-folder.md). The column schema is a table checked field by
 * field rather than an object schema: a long run has millions of rows, and a message must name
 * the file, the line and the column.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { SAMPLE_COLUMNS, SAMPLE_HEADER } from '../sinks/sample-row.js';

export interface SampleRecord {
  hostS: number;
  wallTime: string;
  channel: number;
  seq: number;
  tickMs: number;
  vRaw: number;
  iRaw: number;
  tRaw: number;
  flags: number;
  /** The live run's calibrated values (NaN when the row left them empty). */
  volts: number;
  amps: number;
  celsius: number;
  chargeAh: number;
  energyWh: number;
  state: string;
  calibrationId: string;
}

type Column = (typeof SAMPLE_COLUMNS)[number];

// A program run's rows name their segment's kind: charging, resting (discharging is shared).
const STATES = new Set([
  'waiting',
  'precheck',
  'starting',
  'discharging',
  'stopping',
  'ended',
  'charging',
  'resting',
]);
const DECIMAL = /^-?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
const WHOLE = /^\d+$/;

interface Rule {
  parse(field: string): number | string | null;
  expect: string;
}

const decimal: Rule = {
  parse: (f) => (DECIMAL.test(f) ? Number(f) : null),
  expect: 'a decimal number',
};
const decimalOrEmpty: Rule = {
  parse: (f) => (f === '' ? Number.NaN : DECIMAL.test(f) ? Number(f) : null),
  expect: 'a decimal number or empty',
};
const whole = (max: number): Rule => ({
  parse: (f) => {
    if (!WHOLE.test(f)) return null;
    const n = Number(f);
    return n <= max ? n : null;
  },
  expect: `a whole number from 0 to ${max}`,
});

const RULES: Record<Column, Rule> = {
  host_s: decimal,
  wall_time: {
    parse: (f) => (Number.isFinite(Date.parse(f)) ? f : null),
    expect: 'an ISO 8601 time',
  },
  channel: whole(15),
  seq: whole(65535),
  tick_ms: whole(4294967295),
  v_raw: whole(2 ** 24 - 1),
  i_raw: whole(2 ** 24 - 1),
  t_raw: whole(2 ** 24 - 1),
  flags: {
    parse: (f) => (/^[0-9A-Fa-f]{1,2}$/.test(f) ? parseInt(f, 16) : null),
    expect: 'one or two hex digits',
  },
  voltage_V: decimalOrEmpty,
  current_A: decimalOrEmpty,
  temperature_C: decimalOrEmpty,
  charge_Ah: decimal,
  energy_Wh: decimal,
  state: { parse: (f) => (STATES.has(f) ? f : null), expect: `one of ${[...STATES].join(', ')}` },
  calibration_id: {
    parse: (f) => (/^(none|[0-9a-f]{16})$/.test(f) ? f : null),
    expect: '"none" or 16 hex digits',
  },
};

/** Splits one RFC 4180 line (fields may be quoted, with "" for a quote); null when a quote is left open. */
export function splitCsvLine(line: string): string[] | null {
  if (!line.includes('"')) return line.split(',');
  const out: string[] = [];
  let i = 0;
  for (;;) {
    if (line[i] === '"') {
      let field = '';
      i++;
      for (;;) {
        const q = line.indexOf('"', i);
        if (q < 0) return null;
        field += line.slice(i, q);
        if (line[q + 1] === '"') {
          field += '"';
          i = q + 2;
        } else {
          i = q + 1;
          break;
        }
      }
      out.push(field);
      if (i === line.length) return out;
      if (line[i] !== ',') return null;
      i++;
    } else {
      const c = line.indexOf(',', i);
      if (c < 0) {
        out.push(line.slice(i));
        return out;
      }
      out.push(line.slice(i, c));
      i = c + 1;
    }
  }
}

export class SampleLineError extends Error {}

/** Checks the header row of a sample file. */
export function checkSampleHeader(line: string, where: string): void {
  if (line.replace(/^\uFEFF/, '') === SAMPLE_HEADER) return;
  throw makeError(
    ErrorCodes.RUN_DATA,
    `the first line is not the sample header (expected "${SAMPLE_HEADER}")`,
    `${where} line 1`,
    'Sample files start with their header row; restore the file as the run wrote it.',
  );
}

/** A record to parse rows into. */
export function blankSampleRecord(): SampleRecord {
  return {
    hostS: 0,
    wallTime: '',
    channel: 0,
    seq: 0,
    tickMs: 0,
    vRaw: 0,
    iRaw: 0,
    tRaw: 0,
    flags: 0,
    volts: 0,
    amps: 0,
    celsius: 0,
    chargeAh: 0,
    energyWh: 0,
    state: '',
    calibrationId: '',
  };
}

function parseByRules(line: string): SampleRecord {
  const f = splitCsvLine(line);
  if (f === null) throw new SampleLineError('a quoted field is not closed');
  if (f.length !== SAMPLE_COLUMNS.length)
    throw new SampleLineError(`${f.length} fields where ${SAMPLE_COLUMNS.length} are expected`);
  const v: Array<number | string> = [];
  for (let i = 0; i < SAMPLE_COLUMNS.length; i++) {
    const col = SAMPLE_COLUMNS[i]!;
    const rule = RULES[col];
    const x = rule.parse(f[i]!);
    if (x === null)
      throw new SampleLineError(
        `column ${col} is ${JSON.stringify(f[i]!.slice(0, 40))}, not ${rule.expect}`,
      );
    v.push(x);
  }
  return {
    hostS: v[0] as number,
    wallTime: v[1] as string,
    channel: v[2] as number,
    seq: v[3] as number,
    tickMs: v[4] as number,
    vRaw: v[5] as number,
    iRaw: v[6] as number,
    tRaw: v[7] as number,
    flags: v[8] as number,
    volts: v[9] as number,
    amps: v[10] as number,
    celsius: v[11] as number,
    chargeAh: v[12] as number,
    energyWh: v[13] as number,
    state: v[14] as string,
    calibrationId: v[15] as string,
  };
}

const POW10 = [1, 10, 100, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];
const STATE_BYTES = [...STATES].map((s) => ({ text: s, bytes: Buffer.from(s, 'latin1') }));
const COUNT_MAX = 2 ** 24 - 1;

/** Whether `bytes` holds `want` at `at` (short runs: cheaper than a native compare). */
function holds(bytes: Buffer, at: number, want: Buffer): boolean {
  for (let k = 0; k < want.length; k++) if (bytes[at + k] !== want[k]) return false;
  return true;
}

/**
 * Text validated before and expected again (most rows repeat the last row's hour, state and
 * calibration id), compared four bytes at a time.
 */
class KnownText {
  text = '';
  private words = new Int32Array(0);
  private tail: Buffer = Buffer.alloc(0);

  get length(): number {
    return this.text.length;
  }

  set(b: Buffer, start: number, end: number): void {
    const whole = (end - start) >> 2;
    this.text = b.toString('latin1', start, end);
    this.words = Int32Array.from({ length: whole }, (_, k) => b.readInt32LE(start + 4 * k));
    this.tail = Buffer.from(b.subarray(start + 4 * whole, end));
  }

  /** Whether `b` (seen through `v`) holds the text at `at`; the caller has checked that it fits. */
  at(b: Buffer, v: DataView, at: number): boolean {
    if (this.text.length === 0) return false;
    const words = this.words;
    for (let k = 0; k < words.length; k++)
      if (v.getInt32(at + 4 * k, true) !== words[k]) return false;
    return holds(b, at + 4 * words.length, this.tail);
  }
}

function hexDigit(c: number): number {
  return c >= 48 && c <= 57
    ? c - 48
    : c >= 65 && c <= 70
      ? c - 55
      : c >= 97 && c <= 102
        ? c - 87
        : -1;
}

function twoDigits(b: Buffer, i: number, max: number): boolean {
  const hi = b[i]! - 48;
  const lo = b[i + 1]! - 48;
  return hi >= 0 && hi <= 9 && lo >= 0 && lo <= 9 && hi * 10 + lo <= max;
}

// How the fast way reads each of the first 14 columns, and what it read: one loop over a
// table with one cursor in a local variable, which the compiler keeps in a register (a cursor
// shared between helper functions has to go through memory at every byte).
const K_WHOLE = 0;
const K_DECIMAL = 1;
const K_DECIMAL_OR_EMPTY = 2;
const K_WALL = 3;
const K_FLAGS = 4;
const KIND = Uint8Array.of(
  K_DECIMAL,
  K_WALL,
  K_WHOLE,
  K_WHOLE,
  K_WHOLE,
  K_WHOLE,
  K_WHOLE,
  K_WHOLE,
  K_FLAGS,
  K_DECIMAL_OR_EMPTY,
  K_DECIMAL_OR_EMPTY,
  K_DECIMAL_OR_EMPTY,
  K_DECIMAL,
  K_DECIMAL,
);
const MAX = Float64Array.of(
  0,
  0,
  15,
  65535,
  4294967295,
  COUNT_MAX,
  COUNT_MAX,
  COUNT_MAX,
  0,
  0,
  0,
  0,
  0,
  0,
);

const pad = (n: number, width: number): string => String(n).padStart(width, '0');
/** `MM:SS.` for every minute and second of an hour, and `sssZ` for every millisecond. */
const MINUTE_SECOND = Array.from(
  { length: 3600 },
  (_, k) => `${pad(Math.floor(k / 60), 2)}:${pad(k % 60, 2)}.`,
);
export const MILLI_Z = Array.from({ length: 1000 }, (_, k) => `${pad(k, 3)}Z`);

/**
 * Reads the rows of one sample file, one after another. Each reader keeps what it learnt from the
 * rows before (the hour, the state and calibration id, the second) to itself: two readers at once
 * never share it.
 */
export class SampleReader {
  /** The first 14 columns of the row last scanned. */
  private readonly value = new Float64Array(KIND.length);
  /** Where the wall time of the row last scanned starts. */
  private wallAt = 0;
  /** A validated `YYYY-MM-DDTHH:` (hour 00-23): any minute and second of that hour is a valid time. */
  private readonly hour = new KnownText();
  /** The state and calibration id of the last row, as `state,id`. */
  private readonly stateAndId = new KnownText();
  private knownState = '';
  private knownId = '';
  /** The wall time of the last row up to its second (`YYYY-MM-DDTHH:MM:SS.`): rows come many a second. */
  private secondOfHour = -1;
  private secondText = '';
  /**
   * The row last parsed the fast way: its wall time is `wallSecond` + MILLI_Z[wallMilli] (the
   * first part shared by the rows of one second); -1 after a row the rules parsed.
   */
  wallMilli = -1;
  wallSecond = '';
  /** A view of the buffer last read from, for reading four bytes at once. */
  private viewed: Buffer = Buffer.alloc(0);
  private view = new DataView(this.viewed.buffer, this.viewed.byteOffset, 0);

  /** One row into a record (a new one unless given); throws SampleLineError saying which column is wrong. */
  parseLine(line: string, into: SampleRecord = blankSampleRecord()): SampleRecord {
    // Only ASCII can be a valid row; other text goes straight to the rules and their message.
    if (Buffer.byteLength(line, 'utf8') === line.length) {
      // With a line end after it, as rows read from a file have.
      const bytes = Buffer.from(`${line}\n`, 'latin1');
      if (this.readFast(bytes, 0, line.length, into)) return into;
    }
    this.wallMilli = -1;
    return Object.assign(into, parseByRules(line));
  }

  /** The row in `bytes` from `start` to `end` (ASCII, its line end at `end`); as parseLine. */
  parseBytes(
    bytes: Buffer,
    start: number,
    end: number,
    into: SampleRecord = blankSampleRecord(),
  ): SampleRecord {
    if (this.readFast(bytes, start, end, into)) return into;
    this.wallMilli = -1;
    return Object.assign(into, parseByRules(bytes.toString('latin1', start, end)));
  }

  private viewOf(b: Buffer): DataView {
    if (b !== this.viewed) {
      this.viewed = b;
      this.view = new DataView(b.buffer, b.byteOffset, b.length);
    }
    return this.view;
  }

  /** `YYYY-MM-DDTHH:MM:SS.sssZ` at `i`, followed by a comma; a new date and hour is checked by Date.parse once. */
  private isWallTime(b: Buffer, i: number, end: number): boolean {
    if (
      i + 24 >= end ||
      b[i + 24] !== 44 ||
      b[i + 23] !== 90 ||
      b[i + 16] !== 58 ||
      b[i + 19] !== 46
    )
      return false;
    if (
      !twoDigits(b, i + 14, 59) ||
      !twoDigits(b, i + 17, 59) ||
      !twoDigits(b, i + 20, 99) ||
      !twoDigits(b, i + 21, 99)
    )
      return false;
    if (this.hour.at(b, this.viewOf(b), i)) return true;
    const prefix = b.toString('latin1', i, i + 14);
    if (
      !/^\d{4}-\d{2}-\d{2}T\d{2}:$/.test(prefix) ||
      !twoDigits(b, i + 11, 23) ||
      !Number.isFinite(Date.parse(`${prefix}00:00.000Z`))
    )
      return false;
    this.hour.set(b, i, i + 14);
    this.secondOfHour = -1;
    return true;
  }

  /**
   * The first 14 columns into `value` (the wall time's place into `wallAt`); returns where the
   * state starts, or -1 for a row the fast way does not take. Whole numbers: digits (leading
   * zeros allowed, as /^\d+$/) up to the column's maximum. Decimals: `-?digits`, `-?digits.` or
   * `-?digits.digits`, or empty where allowed (NaN); up to 15 digits the value is their integer
   * over a power of ten, both exact, so the one rounding of the division gives the same double
   * as Number(); longer ones go to Number(). Flags: one or two hex digits.
   */
  private scanColumns(b: Buffer, start: number, end: number): number {
    const value = this.value;
    // The digit loops stop at the first byte that is not a digit without checking `end`: the
    // line end at `end` is such a byte, and the checks after each loop refuse a field that ran
    // into it. Without one there, the rules take the row.
    if (b[end] !== 10 && b[end] !== 13) return -1;
    let i = start;
    for (let col = 0; col < KIND.length; col++) {
      const kind = KIND[col]!;
      if (kind === K_WHOLE) {
        const first = i;
        let n = 0;
        for (; ; i++) {
          const d = b[i]! - 48;
          // One unsigned comparison for the common case, a digit; a comma is 44 - 48 = -4.
          if (d >>> 0 > 9) {
            if (d === -4) break;
            return -1;
          }
          n = n * 10 + d;
        }
        if (i === first || i === end || n > MAX[col]!) return -1;
        value[col] = n;
      } else if (kind === K_WALL) {
        if (!this.isWallTime(b, i, end)) return -1;
        this.wallAt = i;
        i += 24;
      } else if (kind === K_FLAGS) {
        if (i + 2 >= end) return -1;
        const hi = hexDigit(b[i]!);
        if (hi < 0) return -1;
        if (b[i + 1] === 44) {
          value[col] = hi;
          i += 1;
        } else {
          const lo = hexDigit(b[i + 1]!);
          if (lo < 0 || b[i + 2] !== 44) return -1;
          value[col] = hi * 16 + lo;
          i += 2;
        }
      } else {
        const first = i;
        const negative = b[i] === 45;
        if (negative) i++;
        const digitsFrom = i;
        let point = -1;
        let m = 0;
        for (; ; i++) {
          const d = b[i]! - 48;
          if (d >>> 0 <= 9) {
            m = m * 10 + d;
            continue;
          }
          if (d === -4) break;
          if (d !== -2 || point >= 0) return -1;
          point = i;
        }
        if (i === end) return -1;
        if (i === first && kind === K_DECIMAL_OR_EMPTY) value[col] = Number.NaN;
        else {
          if (i === digitsFrom || point === digitsFrom) return -1;
          const digits = i - digitsFrom - (point < 0 ? 0 : 1);
          const x =
            digits > 15
              ? Number(b.toString('latin1', digitsFrom, i))
              : point < 0
                ? m
                : m / POW10[i - point - 1]!;
          value[col] = negative ? -x : x;
        }
      }
      i++; // the comma
    }
    return i;
  }

  /*
   * The fast way through a row as the daemon writes it, in one pass over its bytes without
   * splitting or regular expressions: a recompute reads millions. It takes only what the rules
   * above surely accept, with the values they give, and hands anything else (quotes, exponents,
   * odd widths, every fault) back to them, so results and messages are the rules' own.
   */
  private readFast(b: Buffer, start: number, end: number, r: SampleRecord): boolean {
    const stateAt = this.scanColumns(b, start, end);
    if (stateAt < 0) return false;
    if (
      end - stateAt !== this.stateAndId.length ||
      !this.stateAndId.at(b, this.viewOf(b), stateAt)
    ) {
      let comma = stateAt;
      while (comma < end && b[comma] !== 44) comma++;
      if (comma === end) return false;
      const state = STATE_BYTES.find(
        (s) => comma - stateAt === s.bytes.length && holds(b, stateAt, s.bytes),
      );
      if (state === undefined) return false;
      const id = b.toString('latin1', comma + 1, end);
      if (!/^(none|[0-9a-f]{16})$/.test(id)) return false;
      this.stateAndId.set(b, stateAt, end);
      this.knownState = state.text;
      this.knownId = id;
    }
    // The same text as the wall time's bytes, from pieces already made: no string is decoded per row.
    const w = this.wallAt;
    const minute = (b[w + 14]! - 48) * 10 + b[w + 15]! - 48;
    const second = (b[w + 17]! - 48) * 10 + b[w + 18]! - 48;
    const milli = (b[w + 20]! - 48) * 100 + (b[w + 21]! - 48) * 10 + b[w + 22]! - 48;
    if (minute * 60 + second !== this.secondOfHour) {
      this.secondOfHour = minute * 60 + second;
      this.secondText = this.hour.text + MINUTE_SECOND[this.secondOfHour]!;
    }
    const v = this.value;
    r.hostS = v[0]!;
    r.wallTime = this.secondText + MILLI_Z[milli]!;
    this.wallSecond = this.secondText;
    this.wallMilli = milli;
    r.channel = v[2]!;
    r.seq = v[3]!;
    r.tickMs = v[4]!;
    r.vRaw = v[5]!;
    r.iRaw = v[6]!;
    r.tRaw = v[7]!;
    r.flags = v[8]!;
    r.volts = v[9]!;
    r.amps = v[10]!;
    r.celsius = v[11]!;
    r.chargeAh = v[12]!;
    r.energyWh = v[13]!;
    r.state = this.knownState;
    r.calibrationId = this.knownId;
    return true;
  }
}
