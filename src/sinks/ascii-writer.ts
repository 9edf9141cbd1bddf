/**
 * Numbers and text written straight into a byte buffer as ASCII, for the sample log: a row
 * built from strings costs some twenty short-lived strings and a join, several times the
 * work of writing its bytes in place, at thousands of rows a second. Every function takes the
 * buffer and a position and returns the position after what it wrote; the caller makes room.
 * The text is exactly that of String(n), x.toFixed(digits) and the string itself.
 */
/** 10^0 to 10^15, all exact doubles. */
const POW10 = Array.from({ length: 16 }, (_, k) => 10 ** k);
/** Below 2^52 every half is a double and a double's fraction is exact after subtracting its floor. */
const EXACT_LIMIT = 2 ** 52;

/** "00" to "99" as byte pairs: two digits per division rather than one. */
const PAIRS = (() => {
  const t = new Uint8Array(200);
  for (let i = 0; i < 100; i++) {
    t[2 * i] = 48 + Math.floor(i / 10);
    t[2 * i + 1] = 48 + (i % 10);
  }
  return t;
})();

/** Decimal digits of a whole number 0 ≤ n < 10^16. */
function digitCount(n: number): number {
  let d = 1;
  while (d < 16 && n >= POW10[d]!) d++;
  return d;
}

/** The last `count` decimal digits of n (zero-padded), ending just before `end`. */
function writeDigits(buf: Uint8Array, end: number, n: number, count: number): void {
  let p = end;
  let left = count;
  let q = n;
  while (left >= 2) {
    const next = Math.floor(q / 100);
    const pair = 2 * (q - next * 100);
    buf[--p] = PAIRS[pair + 1]!;
    buf[--p] = PAIRS[pair]!;
    q = next;
    left -= 2;
  }
  if (left === 1) buf[p - 1] = 48 + (q % 10);
}

/** A whole number 0 ≤ n < 2^53, in decimal. */
export function writeUint(buf: Uint8Array, at: number, n: number): number {
  if (n < 10) {
    buf[at] = 48 + n;
    return at + 1;
  }
  const count = digitCount(n);
  writeDigits(buf, at + count, n, count);
  return at + count;
}

/** Text of up to 0x7f per character; anything wider goes in as UTF-8. */
export function writeText(buf: Buffer, at: number, text: string): number {
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (c > 0x7f) return at + buf.write(text, at, 'utf8');
    buf[at + i] = c;
  }
  return at + text.length;
}

/**
 * `x.toFixed(digits)`, for digits 0–9. toFixed rounds the exact decimal value of x × 10^digits;
 * the double product can differ from it, but rounding is monotonic and every n + 0.5 below
 * 2^52 is a double, so the product lands on the same side of each half as the exact value, or
 * on the half itself. Only that case, and huge or non-finite values, go to toFixed itself.
 */
export function writeFixed(buf: Buffer, at: number, x: number, digits: number): number {
  const scale = digits <= 9 ? POW10[digits] : undefined;
  if (scale === undefined) return writeText(buf, at, x.toFixed(digits));
  const negative = x < 0;
  const y = (negative ? -x : x) * scale;
  if (!(y < EXACT_LIMIT)) return writeText(buf, at, x.toFixed(digits));
  const whole = Math.floor(y);
  const frac = y - whole;
  if (frac === 0.5) return writeText(buf, at, x.toFixed(digits));
  const n = frac > 0.5 ? whole + 1 : whole;
  let p = at;
  if (negative) buf[p++] = 45;
  const intPart = Math.floor(n / scale);
  p = writeUint(buf, p, intPart);
  if (digits === 0) return p;
  buf[p++] = 46;
  writeDigits(buf, p + digits, n - intPart * scale, digits);
  return p + digits;
}
