import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { parseProgram } from '../../src/program/program-file.js';
import { planProgram } from '../../src/program/program-plan.js';
import type { ProgramFrame } from '../../src/program/sequence-types.js';
import { ProgramSequencer } from '../../src/program/sequencer.js';

const plan = planProgram(
  parseProgram(
    `name: p
rated_Ah: 2
steps:
  - repeat:
      times: 2
      steps:
        - charge: { current_C: 0.5, timeout_h: 1 }
        - rest: { settle_mV_per_min: 1, max_minutes: 2 }
        - discharge: { current_C: 0.2 }
  - storage: {}
`,
    'p.yaml',
  ),
  { profile: findChemistry(loadChemistries(), 'li-ion'), cells: 1, where: 'p.yaml' },
);

const frames = fc.array(
  fc.record({
    dt: fc.integer({ min: 0, max: 120_000 }),
    voltageV: fc.double({ min: 2.5, max: 4.4, noNaN: true }),
    currentA: fc.double({ min: -1.5, max: 1.5, noNaN: true }),
    temperatureC: fc.option(fc.double({ min: -10, max: 70, noNaN: true })),
    mode: fc.constantFrom('rest' as const, 'discharge' as const, 'charge' as const),
  }),
  { maxLength: 300 },
);

describe('sequencer invariants on arbitrary frames', () => {
  it('no charge is asked on a frame outside 0–45 °C or without a temperature (Li-ion window, common practice); an abort rests the channel; nothing after the end', () => {
    fc.assert(
      fc.property(frames, (fs) => {
        const seq = new ProgramSequencer(plan);
        let t = 0;
        let finished = false;
        let index = 0;
        for (const x of fs) {
          t += x.dt;
          const f: ProgramFrame = { ...x, t_ms: t };
          const u = seq.onFrame(f);
          if (finished)
            expect(u).toEqual({ intents: [], ended: [], started: null, finished: null });
          if (u.intents.some((i) => i.type === 'set-charge')) {
            expect(f.temperatureC).not.toBeNull();
            expect(f.temperatureC!).toBeGreaterThanOrEqual(0);
            expect(f.temperatureC!).toBeLessThanOrEqual(45);
          }
          if (u.finished?.aborted) expect(u.intents).toEqual([{ type: 'set-mode', mode: 'rest' }]);
          for (const e of u.ended) expect(e.index).toBe(index++);
          finished ||= u.finished !== null;
        }
        expect(seq.segments.length).toBeLessThanOrEqual(plan.steps.length);
      }),
      { numRuns: 300 },
    );
  });
});
