import { writeFixed, writeText, writeUint } from './ascii-writer.js';
import { IsoTimeWriter } from './iso-time.js';

/** The columns of samples-NNNN.csv (docs/run-folder.md); the order is a contract. */
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

/** Longest row without its two free-text fields: 6 numbers of up to 2^53 at 7 decimals (or toFixed's 1e21 form), the time, 6 counts, flags and commas. */
const ROW_FIXED_MAX = 6 * 32 + 24 + 6 * 16 + 4 + 16;

/** Room a row needs in the buffer, line end included (UTF-8 takes at most 3 bytes a UTF-16 unit). */
export function sampleRowMaxBytes(r: SampleRow): number {
  return ROW_FIXED_MAX + 3 * (r.state.length + r.calibrationId.length) + 1;
}

const COMMA = 44;

/** A text field that rarely changes (the state, the calibration id), kept as its bytes. */
interface CachedText {
  text: string | null;
  bytes: Buffer;
}

function writeCached(c: CachedText, buf: Buffer, at: number, text: string): number {
  if (c.text !== text) {
    c.text = text;
    c.bytes = Buffer.from(text, 'utf8');
  }
  const bytes = c.bytes;
  for (let k = 0; k < bytes.length; k++) buf[at + k] = bytes[k]!;
  return at + bytes.length;
}

/** An empty field for a reading that is not a number (an open thermistor). */
function writeReading(buf: Buffer, at: number, x: number, digits: number): number {
  return Number.isFinite(x) ? writeFixed(buf, at, x, digits) : at;
}

function hexDigit(n: number): number {
  return n < 10 ? 48 + n : 55 + n;
}

/**
 * Writes the rows of one sample log. Each writer keeps its own copies of the text that rarely
 * changes (the hour, the state, the calibration id): two logs at once never share them.
 */
export class SampleRowWriter {
  private readonly time = new IsoTimeWriter();
  private readonly state: CachedText = { text: null, bytes: Buffer.alloc(0) };
  private readonly id: CachedText = { text: null, bytes: Buffer.alloc(0) };

  /**
   * One RFC 4180 row and its line end, written into `buf` at `at` (with sampleRowMaxBytes of
   * room); returns the position after it. No field can hold a comma, quote or newline, so none
   * needs quoting. Bound, so it can be handed on as it is.
   */
  readonly write = (r: SampleRow, buf: Buffer, at: number): number => {
    let p = comma(buf, writeFixed(buf, at, r.hostS, 3));
    p = comma(buf, this.time.write(buf, p, r.wallMs));
    for (const n of [r.channel, r.seq, r.tickMs, r.vRaw, r.iRaw, r.tRaw])
      p = comma(buf, writeUint(buf, p, n));
    if (r.flags > 0xff) p = writeText(buf, p, r.flags.toString(16).toUpperCase());
    else {
      buf[p++] = hexDigit(r.flags >> 4);
      buf[p++] = hexDigit(r.flags & 15);
    }
    p = comma(buf, p);
    p = comma(buf, writeReading(buf, p, r.volts, 5));
    p = comma(buf, writeReading(buf, p, r.amps, 5));
    p = comma(buf, writeReading(buf, p, r.celsius, 2));
    p = comma(buf, writeFixed(buf, p, r.chargeAh, 7));
    p = comma(buf, writeFixed(buf, p, r.energyWh, 7));
    p = comma(buf, writeCached(this.state, buf, p, r.state));
    p = writeCached(this.id, buf, p, r.calibrationId);
    buf[p] = 10;
    return p + 1;
  };
}

/** The field separator after what ends at `at`. */
function comma(buf: Buffer, at: number): number {
  buf[at] = COMMA;
  return at + 1;
}

/** The same row as a string, without its line end (for tools and tests that build run folders). */
export function formatSampleRow(r: SampleRow): string {
  const buf = Buffer.alloc(sampleRowMaxBytes(r));
  return buf.toString('utf8', 0, new SampleRowWriter().write(r, buf, 0) - 1);
}
