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
