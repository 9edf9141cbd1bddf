import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { crc16, crcHex } from '../../src/protocol/crc16.js';
import { ibm3740, xmodem } from './reference-crc.js';

const CHECK_INPUT = '123456789';

describe('CRC-16/IBM-3740 (source: CRC RevEng, Catalogue of parametrised CRC algorithms)', () => {
  it('gives the catalogue check value 0x29B1 for ASCII "123456789"', () => {
    expect(crc16(CHECK_INPUT)).toBe(0x29b1);
    expect(crcHex(CHECK_INPUT)).toBe('29B1');
  });

  it('the bit-by-bit reference model gives the catalogue values for both parameter sets', () => {
    // IBM-3740 0x29B1 and XMODEM 0x31C3 (source: CRC RevEng catalogue)
    expect(ibm3740(CHECK_INPUT)).toBe(0x29b1);
    expect(xmodem(CHECK_INPUT)).toBe(0x31c3);
  });

  it('negative control: the product does not give the CRC-16/XMODEM value 0x31C3 (source: CRC RevEng)', () => {
    expect(crc16(CHECK_INPUT)).not.toBe(0x31c3);
    // Only the init differs between the two: with init 0 the product's table reproduces XMODEM.
    expect(crc16(CHECK_INPUT, 0x0000)).toBe(0x31c3);
  });

  it('the empty string gives the init value (CRC RevEng parameter model: no bytes, no shifts)', () => {
    expect(crc16('')).toBe(0xffff);
  });

  it('the table-driven product matches the bit-by-bit reference on arbitrary printable text', () => {
    fc.assert(
      fc.property(
        fc.string({
          unit: fc.constantFrom(
            ...Array.from({ length: 95 }, (_, i) => String.fromCharCode(0x20 + i)),
          ),
          maxLength: 80,
        }),
        (s) => {
          expect(crc16(s)).toBe(ibm3740(s));
        },
      ),
      { numRuns: 2000 },
    );
  });

  it('crcHex is four upper-case hex digits, zero padded', () => {
    fc.assert(
      fc.property(fc.string({ maxLength: 40 }), (s) => {
        const hex = crcHex(s);
        expect(hex).toMatch(/^[0-9A-F]{4}$/);
        expect(parseInt(hex, 16)).toBe(crc16(s));
      }),
      { numRuns: 500 },
    );
  });
});
