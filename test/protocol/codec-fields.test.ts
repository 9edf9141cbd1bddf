import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeRigLine } from '../../src/protocol/codec.js';
import { referenceLine } from './reference-crc.js';

/**
 * A data-frame decoder written straight from docs/protocol.md (protocol v1: eight comma-separated
 * fields, ranges per field, flags one or two hex digits) and the field grammar the codec tests
 * pin down (decimal without sign, point or leading zero), using split and regular expressions
 * only. The product's decoder must agree with it on every line, accepted or not.
 */
function referenceData(
  payload: string,
  adcBits: number,
): { ok: true; values: number[] } | { ok: false; reason: string } {
  const f = payload.split(',');
  if (f.length !== 8) return { ok: false, reason: 'field_count' };
  const max = [15, 65535, 2 ** 32 - 1, 2 ** adcBits - 1, 2 ** adcBits - 1, 2 ** adcBits - 1];
  const nums = f.slice(1, 7);
  if (nums.some((x) => !/^(0|[1-9][0-9]{0,9})$/.test(x)) || !/^[0-9A-Fa-f]{1,2}$/.test(f[7]!))
    return { ok: false, reason: 'not_numeric' };
  const values = nums.map(Number);
  if (values.some((v, k) => v > max[k]!)) return { ok: false, reason: 'out_of_range' };
  return { ok: true, values: [...values, parseInt(f[7]!, 16)] };
}

const digits = fc.stringMatching(/^[0-9]{1,12}$/);
const field = fc.oneof(
  { weight: 6, arbitrary: fc.integer({ min: 0, max: 70000 }).map(String) },
  {
    weight: 2,
    arbitrary: fc.oneof(
      fc.constant('4294967295'),
      fc.constant('4294967296'),
      fc.constant('0'),
      fc.constant('00'),
      digits,
    ),
  },
  {
    weight: 1,
    arbitrary: fc.oneof(
      fc.constant(''),
      fc.constant('-1'),
      fc.constant('+1'),
      fc.constant('1.5'),
      fc.constant(' 7'),
      fc.constant('x'),
    ),
  },
);
const flags = fc.oneof(
  fc.stringMatching(/^[0-9A-Fa-f]{1,2}$/),
  fc.constantFrom('', '001', 'G', '0x', ' 1'),
);
const payload = fc.oneof(
  {
    weight: 8,
    arbitrary: fc
      .tuple(fc.array(field, { minLength: 6, maxLength: 6 }), flags)
      .map(([nums, fl]) => ['D', ...nums, fl].join(',')),
  },
  {
    weight: 1,
    arbitrary: fc
      .array(fc.oneof(field, flags), { minLength: 0, maxLength: 9 })
      .map((xs) => ['D', ...xs].join(',')),
  },
);

describe('data frames: the decoder agrees with a decoder written from docs/protocol.md', () => {
  it('on every mix of well-formed, malformed, out-of-range and miscounted fields', () => {
    fc.assert(
      fc.property(payload, fc.constantFrom(10, 12, 16, 40), fc.boolean(), (p, bits, cr) => {
        const line = referenceLine(p) + (cr ? '\r' : '');
        if (line.length - (cr ? 1 : 0) > 200) return;
        const got = decodeRigLine(line, bits);
        const want = referenceData(p, bits);
        if (want.ok) {
          expect(got.ok).toBe(true);
          if (!got.ok || got.message.kind !== 'data') return;
          const m = got.message;
          expect([m.channel, m.seq, m.tickMs, m.vRaw, m.iRaw, m.tRaw, m.flags]).toEqual(
            want.values,
          );
        } else {
          expect(got).toMatchObject({ ok: false, reason: want.reason });
        }
      }),
      { numRuns: 20_000 },
    );
  });
});
