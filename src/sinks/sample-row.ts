import { fixedDecimal } from './fixed-decimal.js';
import { isoTime } from './iso-time.js';

/** The columns of samples-NNNN.csv (DESIGN.md "Run folder"); the order is a contract. */
export const SAMPLE_COLUMNS = [
  'host_s',
  'wall_time',
  'channel',
  'seq',
  'tick_ms',
  'v_raw',
  'i_raw',
  't_raw',
  'flags',
  'voltage_V',
  'current_A',
  'temperature_C',
  'charge_Ah',
  'energy_Wh',
  'state',
  'calibration_id',
] as const;

export const SAMPLE_HEADER = SAMPLE_COLUMNS.join(',');

export interface SampleRow {
  hostS: number;
  wallMs: number;
  channel: number;
  seq: number;
  tickMs: number;
  vRaw: number;
  iRaw: number;
  tRaw: number;
  flags: number;
  volts: number;
  amps: number;
  celsius: number;
  chargeAh: number;
  energyWh: number;
  state: string;
  calibrationId: string;
}

const FLAG_TEXT = Array.from({ length: 256 }, (_, n) => n.toString(16).toUpperCase().padStart(2, '0'));

function num(x: number, digits: number): string {
  return Number.isFinite(x) ? fixedDecimal(x, digits) : '';
}

/**
 * One RFC 4180 row. No field can hold a comma, quote or newline, so none needs quoting. Joined
 * from an array, which makes one flat string: a template literal makes a rope of some thirty
 * pieces that the log writer would have to flatten later, after the collector had copied it.
 */
export function formatSampleRow(r: SampleRow): string {
  return [
    fixedDecimal(r.hostS, 3),
    isoTime(r.wallMs),
    r.channel,
    r.seq,
    r.tickMs,
    r.vRaw,
    r.iRaw,
    r.tRaw,
    FLAG_TEXT[r.flags] ?? r.flags.toString(16).toUpperCase().padStart(2, '0'),
    num(r.volts, 5),
    num(r.amps, 5),
    num(r.celsius, 2),
    fixedDecimal(r.chargeAh, 7),
    fixedDecimal(r.energyWh, 7),
    r.state,
    r.calibrationId,
  ].join(',');
}
