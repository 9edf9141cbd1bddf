/**
 * The text of `new Date(ms).toISOString()` written as bytes, without a Date per call: each
 * writer keeps the date and hour of its previous call and writes only minutes, seconds and
 * milliseconds. Whole, non-negative times before the year 10000 take the fast way; others go
 * to Date.
 */
import { writeText } from './ascii-writer.js';

const HOUR_MS = 3_600_000;
const YEAR_10000_MS = 253_402_300_800_000;

function writeTwo(buf: Uint8Array, at: number, n: number): void {
  const tens = Math.floor(n / 10);
  buf[at] = 48 + tens;
  buf[at + 1] = 48 + n - tens * 10;
}

/** Writes ISO 8601 times for one stream of rows (one per log writer: the cache is its own). */
export class IsoTimeWriter {
  private prefixHour = Number.NaN;
  /** `YYYY-MM-DDTHH:` of prefixHour, as bytes. */
  private prefix = Buffer.alloc(0);

  /** Writes the time into `buf` at `at` (24 bytes on the fast way); returns the position after it. The sample log writes one per frame. */
  write(buf: Buffer, at: number, ms: number): number {
    if (!Number.isInteger(ms) || ms < 0 || ms >= YEAR_10000_MS)
      return writeText(buf, at, new Date(ms).toISOString());
    const hour = Math.floor(ms / HOUR_MS);
    if (hour !== this.prefixHour) {
      this.prefix = Buffer.from(new Date(hour * HOUR_MS).toISOString().slice(0, 14), 'latin1');
      this.prefixHour = hour;
    }
    const prefix = this.prefix;
    for (let k = 0; k < 14; k++) buf[at + k] = prefix[k]!;
    const inHour = ms - hour * HOUR_MS;
    const minutes = Math.floor(inHour / 60_000);
    const inMinute = inHour - minutes * 60_000;
    const seconds = Math.floor(inMinute / 1000);
    const millis = inMinute - seconds * 1000;
    writeTwo(buf, at + 14, minutes);
    buf[at + 16] = 58;
    writeTwo(buf, at + 17, seconds);
    buf[at + 19] = 46;
    const hundreds = Math.floor(millis / 100);
    buf[at + 20] = 48 + hundreds;
    writeTwo(buf, at + 21, millis - hundreds * 100);
    buf[at + 23] = 90;
    return at + 24;
  }
}
