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

function num(x: number, digits: number): string {
  return Number.isFinite(x) ? x.toFixed(digits) : '';
}

/** One RFC 4180 row. No field can hold a comma, quote or newline, so none needs quoting. */
export function formatSampleRow(r: SampleRow): string {
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
}
