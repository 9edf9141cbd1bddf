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
