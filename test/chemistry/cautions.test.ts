import { describe, expect, it } from 'vitest';
import { cautionLines } from '../../src/chemistry/cautions.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';

const shipped = loadChemistries();
const liIon = shipped.find((c) => c.id === 'li-ion')!;

// The safety points every discharge needs (common practice): a fire-safe place, a fuse, the
// polarity, stopping when a cell misbehaves, and the datasheet first.
describe('cautions at the start of a run', () => {
  it.each(shipped.map((c) => [c.id, c] as const))(
    '%s: every point once, none of them dropped',
    (_id, chemistry) => {
      const lines = cautionLines(chemistry);
      expect(new Set(lines).size).toBe(lines.length);
      for (const topic of [/fire-safe|flammable/i, /\bfuse\b/i, /polarity/i, /datasheet/i]) {
        const hits = lines.filter((l) => topic.test(l));
        expect(hits, `${String(topic)} in ${lines.join(' | ')}`).toHaveLength(1);
      }
      expect(lines.filter((l) => /stop at once/i.test(l)).length).toBeLessThanOrEqual(1);
    },
  );

  it('Li-ion: its own fire, fuse and stop lines replace the general ones (7 lines, not 9)', () => {
    const lines = cautionLines(liIon);
    expect(lines).toHaveLength(liIon.cautions.length + 2);
    expect(lines).toContain('Check the polarity before connecting.');
    expect(lines.filter((l) => /stop at once/i.test(l))).toEqual([
      'Stop at once if the cell swells, hisses, vents, smells sweet or gets hot.',
    ]);
  });
});
