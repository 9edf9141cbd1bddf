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
