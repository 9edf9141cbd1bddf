/**
 * A bit-by-bit CRC-16 written straight from the parameter model of the "Catalogue of
 * parametrised CRC algorithms" (CRC RevEng): width 16, poly, init, refin = refout = false,
 * xorout 0. Independent of the product's table-driven code, so the two can check each other.
 */
export function referenceCrc16(bytes: readonly number[], poly: number, init: number): number {
  let crc = init;
  for (const byte of bytes) {
    crc ^= byte << 8;
    for (let k = 0; k < 8; k++) {
      crc = crc & 0x8000 ? ((crc << 1) ^ poly) & 0xffff : (crc << 1) & 0xffff;
    }
  }
  return crc;
}

export const ascii = (text: string): number[] => Array.from(text, (c) => c.charCodeAt(0));

/** CRC-16/IBM-3740 (poly 0x1021, init 0xFFFF): the rig protocol's checksum. */
export const ibm3740 = (text: string): number => referenceCrc16(ascii(text), 0x1021, 0xffff);

/** CRC-16/XMODEM (poly 0x1021, init 0x0000): same polynomial, other init. */
export const xmodem = (text: string): number => referenceCrc16(ascii(text), 0x1021, 0x0000);

/** Frames a payload the way the protocol document says, using the reference CRC. */
export function referenceLine(payload: string, lowerCase = false): string {
  const hex = ibm3740(payload).toString(16).padStart(4, '0');
  return `${payload}|${lowerCase ? hex : hex.toUpperCase()}`;
}
