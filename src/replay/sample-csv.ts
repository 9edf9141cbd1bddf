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

const STATES = new Set(['waiting', 'precheck', 'starting', 'discharging', 'stopping', 'ended']);
const DECIMAL = /^-?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
const WHOLE = /^\d+$/;

interface Rule {
  parse(field: string): number | string | null;
  expect: string;
}

const decimal: Rule = { parse: (f) => (DECIMAL.test(f) ? Number(f) : null), expect: 'a decimal number' };
const decimalOrEmpty: Rule = { parse: (f) => (f === '' ? Number.NaN : DECIMAL.test(f) ? Number(f) : null), expect: 'a decimal number or empty' };
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
  wall_time: { parse: (f) => (Number.isFinite(Date.parse(f)) ? f : null), expect: 'an ISO 8601 time' },
  channel: whole(15),
  seq: whole(65535),
  tick_ms: whole(4294967295),
  v_raw: whole(2 ** 24 - 1),
  i_raw: whole(2 ** 24 - 1),
  t_raw: whole(2 ** 24 - 1),
  flags: { parse: (f) => (/^[0-9A-Fa-f]{1,2}$/.test(f) ? parseInt(f, 16) : null), expect: 'one or two hex digits' },
  voltage_V: decimalOrEmpty,
  current_A: decimalOrEmpty,
  temperature_C: decimalOrEmpty,
  charge_Ah: decimal,
  energy_Wh: decimal,
  state: { parse: (f) => (STATES.has(f) ? f : null), expect: `one of ${[...STATES].join(', ')}` },
  calibration_id: { parse: (f) => (/^(none|[0-9a-f]{16})$/.test(f) ? f : null), expect: '"none" or 16 hex digits' },
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

/** One row to a record; throws SampleLineError saying which column is wrong. */
export function parseSampleLine(line: string): SampleRecord {
  // Only ASCII can be a valid row; other text goes straight to the rules and their message.
  if (Buffer.byteLength(line, 'utf8') !== line.length) return parseByRules(line);
  const bytes = Buffer.from(line, 'latin1');
  return fastRows.read(bytes, 0, bytes.length) ?? parseByRules(line);
}

/** The row in `bytes` from `start` to `end` (ASCII, without its line end); as parseSampleLine. */
export function parseSampleBytes(bytes: Buffer, start: number, end: number): SampleRecord {
  return fastRows.read(bytes, start, end) ?? parseByRules(bytes.toString('latin1', start, end));
}

function parseByRules(line: string): SampleRecord {
  const f = splitCsvLine(line);
  if (f === null) throw new SampleLineError('a quoted field is not closed');
  if (f.length !== SAMPLE_COLUMNS.length) throw new SampleLineError(`${f.length} fields where ${SAMPLE_COLUMNS.length} are expected`);
  const v: Array<number | string> = [];
  for (let i = 0; i < SAMPLE_COLUMNS.length; i++) {
    const col = SAMPLE_COLUMNS[i]!;
    const rule = RULES[col];
    const x = rule.parse(f[i]!);
    if (x === null) throw new SampleLineError(`column ${col} is ${JSON.stringify(f[i]!.slice(0, 40))}, not ${rule.expect}`);
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

/*
 * The fast way through a row as the daemon writes it, in one pass over its bytes without
 * splitting, strings or regular expressions: a recompute reads millions. It takes only what the
 * rules above surely accept, with the values they give, and hands anything else (quotes,
 * exponents, odd widths, every fault) back to them, so results and messages are the rules' own.
 */

const POW10 = [1, 10, 100, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];
const STATE_BYTES = [...STATES].map((s) => ({ text: s, bytes: Buffer.from(s, 'latin1') }));
const COUNT_MAX = 2 ** 24 - 1;

/** Whether `bytes` holds `want` at `at` (short runs: cheaper than a native compare). */
function holds(bytes: Buffer, at: number, want: Buffer): boolean {
  for (let k = 0; k < want.length; k++) if (bytes[at + k] !== want[k]) return false;
  return true;
}

function hexDigit(c: number): number {
  return c >= 48 && c <= 57 ? c - 48 : c >= 65 && c <= 70 ? c - 55 : c >= 97 && c <= 102 ? c - 87 : -1;
}

class FastRowReader {
  private b: Buffer = Buffer.alloc(0);
  private end = 0;
  /** Where the next field starts. */
  private at = 0;
  /** Cleared by a field the fast way does not take. */
  private fast = true;
  /** A validated `YYYY-MM-DDTHH:` (hour 00-23): any minute and second of that hour is a valid time. */
  private hourPrefix = Buffer.alloc(0);
  private calibrationId = 'none';
  private calibrationIdBytes = Buffer.from('none', 'latin1');

  /** A field of digits (leading zeros allowed, as /^\d+$/) up to `max`, ending in a comma. */
  private whole(max: number): number {
    const b = this.b;
    const start = this.at;
    let v = 0;
    let i = start;
    for (; i < this.end; i++) {
      const c = b[i]!;
      if (c === 44) break;
      if (c < 48 || c > 57) return (this.fast = false), 0;
      v = v * 10 + (c - 48);
    }
    if (i === start || i === this.end || v > max) return (this.fast = false), 0;
    this.at = i + 1;
    return v;
  }

  /**
   * `-?digits`, `-?digits.` or `-?digits.digits`, ending in a comma; empty gives NaN where
   * allowed. Up to 15 digits the value is their integer over a power of ten, both exact, so the
   * one rounding of the division gives the same double as Number(); longer ones go to Number().
   */
  private decimal(emptyIsNaN: boolean): number {
    const b = this.b;
    const start = this.at;
    let i = start;
    const negative = b[i] === 45;
    if (negative) i++;
    const first = i;
    let point = -1;
    let mantissa = 0;
    for (; i < this.end; i++) {
      const c = b[i]!;
      if (c === 44) break;
      if (c === 46 && point < 0) {
        point = i;
        continue;
      }
      if (c < 48 || c > 57) return (this.fast = false), 0;
      mantissa = mantissa * 10 + (c - 48);
    }
    if (i === this.end) return (this.fast = false), 0;
    if (i === start && emptyIsNaN) {
      this.at = i + 1;
      return Number.NaN;
    }
    if (i === first || point === first) return (this.fast = false), 0;
    this.at = i + 1;
    const digits = i - first - (point < 0 ? 0 : 1);
    if (digits > 15) return Number(b.toString('latin1', start, i));
    const value = point < 0 ? mantissa : mantissa / POW10[i - point - 1]!;
    return negative ? -value : value;
  }

  private twoDigits(i: number, max: number): boolean {
    const a = this.b[i]! - 48;
    const c = this.b[i + 1]! - 48;
    return a >= 0 && a <= 9 && c >= 0 && c <= 9 && a * 10 + c <= max;
  }

  /** `YYYY-MM-DDTHH:MM:SS.sssZ`; a new date and hour is checked by Date.parse once. */
  private wallTime(): string {
    const b = this.b;
    const i = this.at;
    if (i + 24 >= this.end || b[i + 24] !== 44 || b[i + 23] !== 90 || b[i + 16] !== 58 || b[i + 19] !== 46) return (this.fast = false), '';
    if (!this.twoDigits(i + 14, 59) || !this.twoDigits(i + 17, 59) || !this.twoDigits(i + 20, 99) || !this.twoDigits(i + 21, 99)) return (this.fast = false), '';
    if (this.hourPrefix.length === 0 || !holds(b, i, this.hourPrefix)) {
      const prefix = b.toString('latin1', i, i + 14);
      if (!/^\d{4}-\d{2}-\d{2}T\d{2}:$/.test(prefix) || !this.twoDigits(i + 11, 23) || !Number.isFinite(Date.parse(`${prefix}00:00.000Z`))) return (this.fast = false), '';
      this.hourPrefix = Buffer.from(prefix, 'latin1');
    }
    this.at = i + 25;
    return b.toString('latin1', i, i + 24);
  }

  read(bytes: Buffer, start: number, end: number): SampleRecord | null {
    this.b = bytes;
    this.end = end;
    this.at = start;
    this.fast = true;
    const hostS = this.decimal(false);
    if (!this.fast) return null;
    const wallTime = this.wallTime();
    if (!this.fast) return null;
    const channel = this.whole(15);
    const seq = this.whole(65535);
    const tickMs = this.whole(4294967295);
    const vRaw = this.whole(COUNT_MAX);
    const iRaw = this.whole(COUNT_MAX);
    const tRaw = this.whole(COUNT_MAX);
    if (!this.fast) return null;
    const at = this.at;
    if (at + 2 >= end) return null;
    const hi = hexDigit(bytes[at]!);
    const two = bytes[at + 2] === 44;
    const lo = two ? hexDigit(bytes[at + 1]!) : 0;
    if (hi < 0 || lo < 0 || (!two && bytes[at + 1] !== 44)) return null;
    const flags = two ? hi * 16 + lo : hi;
    this.at = at + (two ? 3 : 2);
    const volts = this.decimal(true);
    const amps = this.decimal(true);
    const celsius = this.decimal(true);
    const chargeAh = this.decimal(false);
    const energyWh = this.decimal(false);
    if (!this.fast) return null;
    const stateAt = this.at;
    const comma = bytes.indexOf(44, stateAt);
    if (comma < 0 || comma >= end) return null;
    let state: string | null = null;
    for (const s of STATE_BYTES) if (comma - stateAt === s.bytes.length && holds(bytes, stateAt, s.bytes)) state = s.text;
    if (state === null) return null;
    const idStart = comma + 1;
    const known = this.calibrationIdBytes;
    if (end - idStart !== known.length || !holds(bytes, idStart, known)) {
      const id = bytes.toString('latin1', idStart, end);
      if (!/^(none|[0-9a-f]{16})$/.test(id)) return null;
      this.calibrationId = id;
      this.calibrationIdBytes = Buffer.from(id, 'latin1');
    }
    const calibrationId = this.calibrationId;
    return { hostS, wallTime, channel, seq, tickMs, vRaw, iRaw, tRaw, flags, volts, amps, celsius, chargeAh, energyWh, state, calibrationId };
  }
}

const fastRows = new FastRowReader();
