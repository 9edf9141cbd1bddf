/** Escaping and number formatting for the HTML report. */

const ESCAPES: Record<string, string> = {
  '&': '&amp;',
  '<': '&lt;',
  '>': '&gt;',
  '"': '&quot;',
  "'": '&#39;',
};

/** Text safe inside an element or a double-quoted attribute. */
export function esc(text: string): string {
  return text.replace(/[&<>"']/g, (c) => ESCAPES[c]!);
}

/** Fixed decimals, or an em dash for a missing value. */
export function num(x: number | null | undefined, digits: number): string {
  return x === null || x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(digits);
}

/** Significant digits, without exponent for everyday magnitudes. */
export function sig(x: number | null | undefined, digits = 3): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  if (x === 0) return '0';
  const a = Math.abs(x);
  if (a >= 1e-4 && a < 1e7) return Number(x.toPrecision(digits)).toString();
  return x.toExponential(digits - 1);
}

/** h:mm:ss of a duration in seconds. */
export function hms(seconds: number | null | undefined): string {
  if (seconds === null || seconds === undefined || !Number.isFinite(seconds)) return '—';
  const s = Math.max(0, Math.round(seconds));
  const h = Math.floor(s / 3600);
  const m = Math.floor((s % 3600) / 60);
  return `${h}:${String(m).padStart(2, '0')}:${String(s % 60).padStart(2, '0')}`;
}

/** A table cell carrying its exact value for machines and a formatted one for people. */
export function cell(key: string, value: number | null, text: string): string {
  return `<td data-key="${esc(key)}" data-value="${value === null || !Number.isFinite(value) ? '' : String(value)}">${esc(text)}</td>`;
}

/**
 * An ISO time as local date and time with the zone it is in, e.g. "2026-12-03 10:15:02 CET"
 * (the zone of the machine writing the report unless one is given).
 */
export function localTime(iso: string, timeZone?: string): string {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  const parts = new Intl.DateTimeFormat('en-CA', {
    year: 'numeric',
    month: '2-digit',
    day: '2-digit',
    hour: '2-digit',
    minute: '2-digit',
    second: '2-digit',
    hourCycle: 'h23',
    timeZoneName: 'short',
    ...(timeZone !== undefined ? { timeZone } : {}),
  }).formatToParts(d);
  const get = (t: string): string => parts.find((p) => p.type === t)?.value ?? '';
  return `${get('year')}-${get('month')}-${get('day')} ${get('hour')}:${get('minute')}:${get('second')} ${get('timeZoneName')}`;
}
