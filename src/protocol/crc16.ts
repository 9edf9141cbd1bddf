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

export function crc16(text: string, init = 0xffff): number {
  let crc = init;
  for (let i = 0; i < text.length; i++) {
    crc = ((crc << 8) & 0xffff) ^ TABLE[((crc >> 8) ^ text.charCodeAt(i)) & 0xff]!;
  }
  return crc;
}

/**
 * CRC of text[0, end) if every character there is printable ASCII (0x20–0x7e), else -1: the
 * codec's check of a data line in the same pass as its checksum.
 */
export function crc16Printable(text: string, end: number): number {
  let crc = 0xffff;
  for (let i = 0; i < end; i++) {
    const c = text.charCodeAt(i);
    if (c < 0x20 || c > 0x7e) return -1;
    crc = ((crc << 8) & 0xffff) ^ TABLE[((crc >> 8) ^ c) & 0xff]!;
  }
  return crc;
}

export function crcHex(text: string): string {
  return crc16(text).toString(16).toUpperCase().padStart(4, '0');
}
