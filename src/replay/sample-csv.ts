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
  return readFast(bytes, 0, bytes.length) ?? parseByRules(line);
}

/** The row in `bytes` from `start` to `end` (ASCII, without its line end); as parseSampleLine. */
export function parseSampleBytes(bytes: Buffer, start: number, end: number): SampleRecord {
  return readFast(bytes, start, end) ?? parseByRules(bytes.toString('latin1', start, end));
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

// The reader's place in the row and whether the row is still on the fast way: module state
// rather than an object's fields, which the hot loops below would have to load through `this`.
/** Where the next field starts. */
let at = 0;
/** Cleared by a field the fast way does not take. */
let fast = true;
/** A validated `YYYY-MM-DDTHH:` (hour 00-23): any minute and second of that hour is a valid time. */
let hourPrefix = Buffer.alloc(0);
let hourPrefixText = '';
let knownId = 'none';
let knownIdBytes = Buffer.from('none', 'latin1');

/** A field of digits (leading zeros allowed, as /^\d+$/) up to `max`, ending in a comma before `end`. */
function fastWhole(b: Buffer, end: number, max: number): number {
  const start = at;
  let v = 0;
  let i = start;
  for (; i < end; i++) {
    const c = b[i]!;
    if (c === 44) break;
    if (c < 48 || c > 57) return (fast = false), 0;
    v = v * 10 + (c - 48);
  }
  if (i === start || i === end || v > max) return (fast = false), 0;
  at = i + 1;
  return v;
}

/**
 * `-?digits`, `-?digits.` or `-?digits.digits`, ending in a comma; empty gives NaN where
 * allowed. Up to 15 digits the value is their integer over a power of ten, both exact, so the
 * one rounding of the division gives the same double as Number(); longer ones go to Number().
 */
function fastDecimal(b: Buffer, end: number, emptyIsNaN: boolean): number {
  const start = at;
  let i = start;
  const negative = b[i] === 45;
  if (negative) i++;
  const first = i;
  let point = -1;
  let mantissa = 0;
  for (; i < end; i++) {
    const c = b[i]!;
    if (c === 44) break;
    if (c === 46 && point < 0) {
      point = i;
      continue;
    }
    if (c < 48 || c > 57) return (fast = false), 0;
    mantissa = mantissa * 10 + (c - 48);
  }
  if (i === end) return (fast = false), 0;
  if (i === start && emptyIsNaN) {
    at = i + 1;
    return Number.NaN;
  }
  if (i === first || point === first) return (fast = false), 0;
  at = i + 1;
  const digits = i - first - (point < 0 ? 0 : 1);
  if (digits > 15) return Number(b.toString('latin1', start, i));
  const value = point < 0 ? mantissa : mantissa / POW10[i - point - 1]!;
  return negative ? -value : value;
}

function twoDigits(b: Buffer, i: number, max: number): boolean {
  const hi = b[i]! - 48;
  const lo = b[i + 1]! - 48;
  return hi >= 0 && hi <= 9 && lo >= 0 && lo <= 9 && hi * 10 + lo <= max;
}

/** `YYYY-MM-DDTHH:MM:SS.sssZ`; a new date and hour is checked by Date.parse once. */
function wallTime(b: Buffer, end: number): string {
  const i = at;
  if (i + 24 >= end || b[i + 24] !== 44 || b[i + 23] !== 90 || b[i + 16] !== 58 || b[i + 19] !== 46) return (fast = false), '';
  if (!twoDigits(b, i + 14, 59) || !twoDigits(b, i + 17, 59) || !twoDigits(b, i + 20, 99) || !twoDigits(b, i + 21, 99)) return (fast = false), '';
  if (hourPrefix.length === 0 || !holds(b, i, hourPrefix)) {
    const prefix = b.toString('latin1', i, i + 14);
    if (!/^\d{4}-\d{2}-\d{2}T\d{2}:$/.test(prefix) || !twoDigits(b, i + 11, 23) || !Number.isFinite(Date.parse(`${prefix}00:00.000Z`))) return (fast = false), '';
    hourPrefix = Buffer.from(prefix, 'latin1');
    hourPrefixText = prefix;
  }
  at = i + 25;
  // The same text as the bytes, from pieces already made: no string is decoded per row.
  const minute = (b[i + 14]! - 48) * 10 + b[i + 15]! - 48;
  const second = (b[i + 17]! - 48) * 10 + b[i + 18]! - 48;
  const milli = (b[i + 20]! - 48) * 100 + (b[i + 21]! - 48) * 10 + b[i + 22]! - 48;
  return hourPrefixText + MINUTE_SECOND[minute * 60 + second]! + MILLI_Z[milli]!;
}

const pad = (n: number, width: number): string => String(n).padStart(width, '0');
/** `MM:SS.` for every minute and second of an hour, and `sssZ` for every millisecond. */
const MINUTE_SECOND = Array.from({ length: 3600 }, (_, k) => `${pad(Math.floor(k / 60), 2)}:${pad(k % 60, 2)}.`);
const MILLI_Z = Array.from({ length: 1000 }, (_, k) => `${pad(k, 3)}Z`);

/*
 * The fast way through a row as the daemon writes it, in one pass over its bytes without
 * splitting or regular expressions: a recompute reads millions. It takes only what the rules
 * above surely accept, with the values they give, and hands anything else (quotes, exponents,
 * odd widths, every fault) back to them, so results and messages are the rules' own.
 */
function readFast(b: Buffer, start: number, end: number): SampleRecord | null {
  at = start;
  fast = true;
  const hostS = fastDecimal(b, end, false);
  if (!fast) return null;
  const wall = wallTime(b, end);
  if (!fast) return null;
  const channel = fastWhole(b, end, 15);
  const seq = fastWhole(b, end, 65535);
  const tickMs = fastWhole(b, end, 4294967295);
  const vRaw = fastWhole(b, end, COUNT_MAX);
  const iRaw = fastWhole(b, end, COUNT_MAX);
  const tRaw = fastWhole(b, end, COUNT_MAX);
  if (!fast) return null;
  const f = at;
  if (f + 2 >= end) return null;
  const hi = hexDigit(b[f]!);
  const two = b[f + 2] === 44;
  const lo = two ? hexDigit(b[f + 1]!) : 0;
  if (hi < 0 || lo < 0 || (!two && b[f + 1] !== 44)) return null;
  const flags = two ? hi * 16 + lo : hi;
  at = f + (two ? 3 : 2);
  const volts = fastDecimal(b, end, true);
  const amps = fastDecimal(b, end, true);
  const celsius = fastDecimal(b, end, true);
  const chargeAh = fastDecimal(b, end, false);
  const energyWh = fastDecimal(b, end, false);
  if (!fast) return null;
  const stateAt = at;
  let comma = stateAt;
  while (comma < end && b[comma] !== 44) comma++;
  if (comma === end) return null;
  let state: string | null = null;
  for (const s of STATE_BYTES) {
    if (comma - stateAt === s.bytes.length && holds(b, stateAt, s.bytes)) {
      state = s.text;
      break;
    }
  }
  if (state === null) return null;
  const idStart = comma + 1;
  if (end - idStart !== knownIdBytes.length || !holds(b, idStart, knownIdBytes)) {
    const id = b.toString('latin1', idStart, end);
    if (!/^(none|[0-9a-f]{16})$/.test(id)) return null;
    knownId = id;
    knownIdBytes = Buffer.from(id, 'latin1');
  }
  return { hostS, wallTime: wall, channel, seq, tickMs, vRaw, iRaw, tRaw, flags, volts, amps, celsius, chargeAh, energyWh, state, calibrationId: knownId };
}


