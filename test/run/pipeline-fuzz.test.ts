/**
 * Property tests (fast-check) of the codec and the pipeline against hostile input: 105 000 runs
 * in all. Nothing may throw, and nothing rejected may reach the integrator or the time base.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeRigLine, encodeDataFrame } from '../../src/protocol/codec.js';
import type { DataFrame } from '../../src/protocol/messages.js';
import type { Pipeline } from '../../src/run/pipeline.js';
import type { Session } from '../../src/session/session.js';
import { referenceLine } from '../protocol/reference-crc.js';
import { LineRig, newPipeline } from './bench-pipeline.js';

const ADC_BITS = 12;

const dataFields = fc.record({
  channel: fc.integer({ min: 0, max: 15 }),
  seq: fc.integer({ min: 0, max: 65535 }),
  tickMs: fc.integer({ min: 0, max: 2 ** 32 - 1 }),
  vRaw: fc.integer({ min: 0, max: 4095 }),
  iRaw: fc.integer({ min: 0, max: 4095 }),
  tRaw: fc.integer({ min: 0, max: 4095 }),
  flags: fc.integer({ min: 0, max: 255 }),
});

const word = fc.string({
  unit: fc.constantFrom(...'abcxyz0123456789-. '),
  minLength: 1,
  maxLength: 12,
});

/** Valid lines of every rig-to-host type, with CRCs in upper or lower case. */
const validLine = fc
  .oneof(
    { weight: 4, arbitrary: dataFields.map((f) => encodeDataFrame(f).trimEnd()) },
    {
      weight: 1,
      arbitrary: fc
        .tuple(word, word, fc.integer({ min: 1, max: 24 }), fc.integer({ min: 1, max: 16 }))
        .map(([id, fw, bits, ch]) => `H,${id},${fw},${bits},${ch}`),
    },
    {
      weight: 1,
      arbitrary: fc.array(word, { minLength: 1, maxLength: 4 }).map((a) => `A,${a.join(',')}`),
    },
    { weight: 1, arbitrary: fc.tuple(word, word).map(([code, text]) => `E,${code},${text}`) },
  )
  .chain((l) =>
    l.startsWith('D,') ? fc.constant(l) : fc.boolean().map((lower) => referenceLine(l, lower)),
  );

/** One character of a line replaced by another byte (0..255, as latin1). */
const mutated = fc
  .tuple(validLine, fc.nat(), fc.integer({ min: 0, max: 255 }))
  .map(([line, pos, byte]) => {
    const at = pos % line.length;
    return { line, at, bad: line.slice(0, at) + String.fromCharCode(byte) + line.slice(at + 1) };
  });

/** Text that looks a little like the protocol, to get past the first checks now and then. */
const protocolish = fc.string({
  unit: fc.constantFrom(...'DHAEC,0123456789|ABCDEFabcdef\r-. '),
  maxLength: 80,
});
const latin1 = fc.uint8Array({ maxLength: 300 }).map((b) => Buffer.from(b).toString('latin1'));
const anyText = fc.oneof(fc.string({ unit: 'binary', maxLength: 120 }), latin1, protocolish);

describe('codec properties', () => {
  it('any text or bytes: decodeRigLine never throws and a reject always names its reason (50 000 runs)', () => {
    fc.assert(
      fc.property(
        fc.oneof(
          anyText,
          mutated.map((m) => m.bad),
        ),
        (text) => {
          const r = decodeRigLine(text, ADC_BITS);
          if (!r.ok) expect(typeof r.detail).toBe('string');
        },
      ),
      { numRuns: 50_000 },
    );
  });

  it('one changed character is caught by the CRC or decodes identically (30 000 runs)', () => {
    // A CRC of degree 16 with a non-zero constant term detects every burst error of 16 bits or
    // less (Peterson and Brown, 1961; from memory): one changed byte in the payload always fails.
    fc.assert(
      fc.property(mutated, ({ line, at, bad }) => {
        fc.pre(bad !== line);
        const r = decodeRigLine(bad, ADC_BITS);
        const bar = line.lastIndexOf('|');
        if (at < bar) {
          expect(r.ok).toBe(false);
          if (!r.ok) expect(['bad_checksum', 'not_text']).toContain(r.reason);
        } else if (r.ok) {
          // only a checksum digit changed in case: the same number
          expect(at).toBeGreaterThan(bar);
          expect(bad[at]!.toLowerCase()).toBe(line[at]!.toLowerCase());
          expect(r).toEqual(decodeRigLine(line, ADC_BITS));
        }
      }),
      { numRuns: 30_000 },
    );
  });

  it('every valid data frame decodes to exactly what was encoded (15 000 runs)', () => {
    fc.assert(
      fc.property(dataFields, (f) => {
        expect(decodeRigLine(encodeDataFrame(f).trimEnd(), ADC_BITS)).toEqual({
          ok: true,
          message: { kind: 'data', ...f } satisfies DataFrame,
        });
      }),
      { numRuns: 15_000 },
    );
  });
});

describe('pipeline properties', () => {
  type Op = { line: string; at: number } | { tick: number };

  // A discharge under way, recorded once as lines and ticks so that it can be replayed into
  // fresh pipelines: deterministic, so every replay ends in the same state.
  const recorder = new LineRig();
  const ops: Op[] = [];
  const feed = recorder.feed.bind(recorder);
  recorder.feed = (text) => {
    ops.push({ line: text, at: recorder.t });
    return feed(text);
  };
  const tick = recorder.session.tick.bind(recorder.session);
  recorder.session.tick = (now) => {
    ops.push({ tick: now });
    return tick(now);
  };
  recorder.run(10_000, () => recorder.session.state === 'discharging');
  recorder.run(500);
  const t = recorder.t;
  const nextLine = (() => {
    recorder.t += 100;
    return recorder.line();
  })();

  function replay(): { pipeline: Pipeline; session: Session } {
    const core = newPipeline();
    for (const op of ops) {
      if ('line' in op) core.pipeline.line(op.line, op.at, op.at);
      else core.session.tick(op.tick);
    }
    return core;
  }

  const snapshot = (c: { pipeline: Pipeline; session: Session }): unknown => ({
    integrator: { ...c.session.integrator },
    state: c.session.state,
    loadOn: c.session.loadOn,
    accepted: c.pipeline.counters.accepted,
    lost: c.pipeline.counters.lost,
    nominalAh: c.pipeline.nominalAh,
  });

  it('the recorded run is discharging with charge on the books', () => {
    const c = replay();
    expect(c.session.state).toBe('discharging');
    expect(c.session.integrator.chargeAh).toBeGreaterThan(0);
    expect(snapshot(c)).toEqual(snapshot(replay()));
  });

  it('rejected lines never throw, never move the totals and leave the next frame unaffected (10 000 runs)', () => {
    const clean = replay();
    const cleanRejected = clean.pipeline.counters.rejected;
    const cleanNext = clean.pipeline.line(nextLine, t + 100, t + 100);
    const cleanAfter = snapshot(clean);
    const damagedNext = fc.tuple(fc.nat(), fc.integer({ min: 0, max: 255 })).map(([pos, byte]) => {
      const at = pos % nextLine.length;
      return nextLine.slice(0, at) + String.fromCharCode(byte) + nextLine.slice(at + 1);
    });
    fc.assert(
      fc.property(
        fc.oneof(
          anyText,
          mutated.map((m) => m.bad),
          damagedNext,
        ),
        (bad) => {
          const hit = replay();
          const before = snapshot(hit);
          const out = hit.pipeline.line(bad, t + 50, t + 50);
          if (out.kind !== 'rejected') return; // a valid line after all (a checksum digit in the other case)
          expect(snapshot(hit)).toEqual(before);
          expect(hit.pipeline.counters.rejected).toBe(cleanRejected + 1);
          // the time base and the session saw nothing: the next good frame comes out the same
          expect(hit.pipeline.line(nextLine, t + 100, t + 100)).toEqual(cleanNext);
          expect(snapshot(hit)).toEqual(cleanAfter);
        },
      ),
      { numRuns: 10_000 },
    );
  });
});
