/**
 * `new Date(ms).toISOString()` with the same text, without a Date per call: the date and hour
 * are kept from the previous call and only minutes, seconds and milliseconds are formatted.
 * Whole, non-negative times before the year 10000 take the fast way; others go to Date.
 */
const HOUR_MS = 3_600_000;
const YEAR_10000_MS = 253_402_300_800_000;

let cachedHour = Number.NaN;
/** The last time asked for and its text: a burst of frames read in one chunk shares its arrival millisecond. */
let lastMs = Number.NaN;
let lastText = '';
/** `YYYY-MM-DDTHH:` of cachedHour. */
let cachedPrefix = '';

const two = (n: number): string => (n < 10 ? '0' + n : String(n));
const three = (n: number): string => (n < 10 ? '00' + n : n < 100 ? '0' + n : String(n));

export function isoTime(ms: number): string {
  if (ms === lastMs) return lastText;
  if (!Number.isInteger(ms) || ms < 0 || ms >= YEAR_10000_MS) return new Date(ms).toISOString();
  const hour = Math.floor(ms / HOUR_MS);
  if (hour !== cachedHour) {
    cachedPrefix = new Date(hour * HOUR_MS).toISOString().slice(0, 14);
    cachedHour = hour;
  }
  const inHour = ms - hour * HOUR_MS;
  const minutes = Math.floor(inHour / 60_000);
  const inMinute = inHour - minutes * 60_000;
  const seconds = Math.floor(inMinute / 1000);
  lastText = `${cachedPrefix}${two(minutes)}:${two(seconds)}.${three(inMinute - seconds * 1000)}Z`;
  lastMs = ms;
  return lastText;
}

/** `YYYY-MM-DDTHH:` of bytePrefixHour, as bytes. */
let bytePrefixHour = Number.NaN;
let bytePrefix = Buffer.alloc(0);

function writeTwo(buf: Uint8Array, at: number, n: number): void {
  const tens = Math.floor(n / 10);
  buf[at] = 48 + tens;
  buf[at + 1] = 48 + n - tens * 10;
}

/**
 * The text of isoTime(ms) written as bytes into `buf` at `at` (24 bytes on the fast way);
 * returns the position after it. The sample log writes one per frame.
 */
export function writeIsoTime(buf: Buffer, at: number, ms: number): number {
  if (!Number.isInteger(ms) || ms < 0 || ms >= YEAR_10000_MS) return at + buf.write(isoTime(ms), at, 'latin1');
  const hour = Math.floor(ms / HOUR_MS);
  if (hour !== bytePrefixHour) {
    bytePrefix = Buffer.from(new Date(hour * HOUR_MS).toISOString().slice(0, 14), 'latin1');
    bytePrefixHour = hour;
  }
  for (let k = 0; k < 14; k++) buf[at + k] = bytePrefix[k]!;
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
