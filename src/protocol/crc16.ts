/**
 * CRC-16/IBM-3740: poly 0x1021, init 0xFFFF, no reflection, xorout 0.
 * Written by hand: a 256-entry table is a few lines, and the registry's CRC packages either
 * pull in Buffer-only APIs or name the parameter set differently from the protocol document.
 */
const TABLE = (() => {
  const t = new Uint16Array(256);
  for (let n = 0; n < 256; n++) {
    let c = n << 8;
    for (let k = 0; k < 8; k++) c = c & 0x8000 ? ((c << 1) ^ 0x1021) & 0xffff : (c << 1) & 0xffff;
    t[n] = c;
  }
  return t;
})();

/** CRC of text[0, end): the codec checks a line's payload in place, without slicing it off. */
export function crc16(text: string, init = 0xffff, end = text.length): number {
  let crc = init;
  for (let i = 0; i < end; i++) {
    crc = ((crc << 8) & 0xffff) ^ TABLE[((crc >> 8) ^ text.charCodeAt(i)) & 0xff]!;
  }
  return crc;
}

export function crcHex(text: string): string {
  return crc16(text).toString(16).toUpperCase().padStart(4, '0');
}
