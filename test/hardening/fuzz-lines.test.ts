/**
 * Hostile input on the rig link, both directions. Every accepted line must carry a correct
 * CRC-16/IBM-3740 by a bitwise implementation of the catalogue's parameters (CRC RevEng,
 * check value 0x29B1), and a rejected line must leave the discharge exactly as it was.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeHostLine, encodeCommand } from '../../src/protocol/codec.js';
import type { HostCommand } from '../../src/protocol/messages.js';
import type { LineOutcome } from '../../src/run/pipeline.js';
import { benchPipeline, dataLine, FRAME_MS, referenceCrc16, snapshot, warmUp } from './helpers.js';
import { applyAll, byteMutation, fieldMutation, lineMutations } from './mutate.js';

const LINE_RUNS = 20_000;
const HOST_RUNS = 55_000;

/** True when `line` (with at most one trailing CR) is printable, short, and ends in a correct checksum. */
function correctlyFramed(line: string): boolean {
  const text = line.endsWith('\r') ? line.slice(0, -1) : line;
  const m = /^([\x20-\x7e]*)\|([0-9A-Fa-f]{4})$/.exec(text);
  return m !== null && text.length <= 200 && parseInt(m[2]!, 16) === referenceCrc16(m[1]!);
}

/** A plain check for the hot loop; fast-check reports the throw with the failing case. */
function check(ok: boolean, what: string): void {
  if (!ok) throw new Error(what);
}

it('the reference CRC gives the catalogue check value', () => {
  expect(referenceCrc16('123456789')).toBe(0x29b1);
});

const frameArb = fc.record({
  channel: fc.oneof(
    { weight: 5, arbitrary: fc.constant(0) },
    { weight: 1, arbitrary: fc.integer({ min: 0, max: 15 }) },
  ),
  vRaw: fc.integer({ min: 0, max: 4095 }),
  iRaw: fc.integer({ min: 0, max: 4095 }),
  tRaw: fc.integer({ min: 0, max: 4095 }),
  flags: fc.oneof(fc.constantFrom(1, 1, 1, 0, 3), fc.integer({ min: 0, max: 255 })),
});

const itemArb = fc.record({
  frame: frameArb,
  mutations: fc.option(lineMutations, { freq: 2, nil: null }),
  /** Extra host delay before the line: some runs cross the long-gap threshold. */
  delayMs: fc.oneof(
    { weight: 9, arbitrary: fc.constant(0) },
    { weight: 1, arbitrary: fc.integer({ min: 0, max: 5000 }) },
  ),
  /** Seq/tick steps: mostly the next frame, sometimes a loss, a repeat or a rig restart. */
  seqStep: fc.oneof(
    { weight: 9, arbitrary: fc.constant(1) },
    { weight: 1, arbitrary: fc.integer({ min: -3, max: 70_000 }) },
  ),
});

describe('rig lines into the pipeline', () => {
  it(`${LINE_RUNS} runs of valid and mutated lines: no throw, rejected lines change nothing`, () => {
    let lines = 0;
    let rejected = 0;
    const reasons: Record<string, number> = {};
    fc.assert(
      fc.property(fc.array(itemArb, { minLength: 1, maxLength: 12 }), (items) => {
        // A is fed everything, B only what A did not reject: they must end identical.
        const a = benchPipeline();
        const b = benchPipeline();
        const start = warmUp(a.pipeline, a.session);
        warmUp(b.pipeline, b.session);
        let { seq, at } = start;
        let lastHostS = -Infinity;
        for (const item of items) {
          seq += item.seqStep;
          at += FRAME_MS + item.delayMs;
          const valid = dataLine({
            ...item.frame,
            seq,
            tickMs: seq * FRAME_MS,
            loadOn: (item.frame.flags & 1) !== 0,
          });
          const line = item.mutations === null ? valid : applyAll(valid, item.mutations);
          const before = snapshot(a.pipeline, a.session);
          const rejectedBefore = a.pipeline.counters.rejected;
          const out: LineOutcome = a.pipeline.line(line, at, at);
          lines++;
          if (out.kind === 'rejected') {
            rejected++;
            reasons[out.reason] = (reasons[out.reason] ?? 0) + 1;
            check(
              snapshot(a.pipeline, a.session) === before,
              'a rejected line changed the totals or counters',
            );
            check(
              a.pipeline.counters.rejected === rejectedBefore + 1,
              'a rejected line was not counted once',
            );
            check(
              !(correctlyFramed(line) && out.reason === 'bad_checksum'),
              'a correct checksum was refused',
            );
          } else {
            check(correctlyFramed(line), 'a line without a correct checksum was accepted');
            b.pipeline.line(line, at, at);
          }
          if (out.kind === 'sample') {
            check(out.row.hostS >= lastHostS, 'host time went backwards');
            lastHostS = out.row.hostS;
          }
        }
        // Hidden state (time base, debounces, precheck) must match too: the same frames after
        // the run give the same rows.
        for (let k = 1; k <= 3; k++) {
          const probe = dataLine({ seq: seq + k, tickMs: (seq + k) * FRAME_MS, loadOn: true });
          const pa = a.pipeline.line(probe, at + k * FRAME_MS, 0);
          const pb = b.pipeline.line(probe, at + k * FRAME_MS, 0);
          check(
            JSON.stringify(pa) === JSON.stringify(pb),
            'the same frame after the run gave different results',
          );
        }
        check(
          snapshot(a.pipeline, a.session) === snapshot(b.pipeline, b.session),
          'rejected lines changed the end state',
        );
        const { rejected: ra, rejectedBy, ...restA } = a.pipeline.counters;
        const { rejected: rb, rejectedBy: _rbb, ...restB } = b.pipeline.counters;
        check(
          JSON.stringify(restA) === JSON.stringify(restB) && rb === 0,
          'counters other than rejected differ',
        );
        check(
          Object.values(rejectedBy).reduce((x, y) => x + y, 0) === ra,
          'rejections by reason do not add up',
        );
        check(
          Number.isFinite(a.session.integrator.chargeAh) &&
            Number.isFinite(a.session.integrator.energyWh),
          'a total is not finite',
        );
      }),
      { numRuns: LINE_RUNS },
    );
    console.log(`rig lines: ${lines} lines in ${LINE_RUNS} runs, ${rejected} rejected`, reasons);
    // The mutations reach every check of the decoder, not just the checksum.
    expect(Object.keys(reasons).sort()).toEqual([
      'bad_checksum',
      'field_count',
      'no_checksum',
      'not_numeric',
      'not_text',
      'out_of_range',
      'overlong',
      'unknown_type',
    ]);
  });
});

const commandArb: fc.Arbitrary<HostCommand> = fc.oneof(
  fc.record({
    command: fc.constant('LOAD' as const),
    channel: fc.integer({ min: 0, max: 15 }),
    on: fc.boolean(),
  }),
  fc.constant<HostCommand>({ command: 'HELLO' }),
  fc.constant<HostCommand>({ command: 'BEAT' }),
);

const HOST_ERRORS = [
  'overlong',
  'not_text',
  'no_checksum',
  'bad_checksum',
  'unknown_type',
  'field_count',
  'out_of_range',
  'not_numeric',
];

describe('host command lines into the simulated rig', () => {
  it('every command the host encodes decodes to itself', () => {
    fc.assert(
      fc.property(commandArb, (cmd) => {
        expect(decodeHostLine(encodeCommand(cmd).trimEnd())).toEqual(cmd);
      }),
      { numRuns: 2_000 },
    );
  });

  it(`${HOST_RUNS} mutated and random command lines: no throw, only correct lines in canonical form are obeyed`, () => {
    const lineArb = fc.oneof(
      fc
        .tuple(commandArb, lineMutations)
        .map(([c, ms]) => applyAll(encodeCommand(c).trimEnd(), ms)),
      fc
        .tuple(commandArb, fc.array(byteMutation, { minLength: 1, maxLength: 4 }))
        .map(([c, ms]) => applyAll(encodeCommand(c).trimEnd(), ms)),
      fc.tuple(commandArb, fieldMutation).map(([c, m]) => m(encodeCommand(c).trimEnd())),
      fc.string({ unit: 'binary', maxLength: 240 }),
    );
    let obeyed = 0;
    fc.assert(
      fc.property(lineArb, (line) => {
        const r = decodeHostLine(line);
        if ('error' in r) {
          expect(HOST_ERRORS).toContain(r.error);
          return;
        }
        obeyed++;
        expect(correctlyFramed(line)).toBe(true);
        // The one spelling of each command: no leading zeros, no spaces, no extra fields.
        const payload = line.replace(/\r$/, '').slice(0, -5);
        expect(encodeCommand(r).trimEnd().slice(0, -5)).toBe(payload);
      }),
      { numRuns: HOST_RUNS },
    );
    console.log(`host lines: ${HOST_RUNS} lines, ${obeyed} obeyed`);
  });
});
