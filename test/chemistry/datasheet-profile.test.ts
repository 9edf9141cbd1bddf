/**
 * The way to follow a cell maker's datasheet that allows a lower end-of-discharge voltage than
 * the shipped Li-ion floor (2.5 V, the lowest of the floors makers commonly state: common
 * practice): a profile of one's own. The example in docs/chemistry-profiles.md must work as
 * written.
 */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries, parseChemistries } from '../../src/chemistry/chemistry-file.js';
import { resolveCutoff } from '../../src/chemistry/limits.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';

const DOC = fileURLToPath(new URL('../../docs/chemistry-profiles.md', import.meta.url));
const SHIPPED = fileURLToPath(new URL('../../config/chemistries.yaml', import.meta.url));

function docExample(): string {
  const m = /```yaml\n([\s\S]*?)```/.exec(readFileSync(DOC, 'utf8'));
  if (!m) throw new Error('no yaml example in the doc');
  // The block is indented inside a list item in the doc.
  return m[1]!.replace(/^ {3}/gm, '');
}

describe('following a datasheet by a chemistry profile of its own', () => {
  it('the shipped Li-ion floor refuses 2.2 V and says how to follow a datasheet', () => {
    const liIon = findChemistry(loadChemistries(), 'li-ion');
    let e: unknown = null;
    try {
      resolveCutoff(liIon, 1, 2.2);
    } catch (err) {
      e = err;
    }
    expect(e).toBeInstanceOf(CellvigilError);
    expect((e as CellvigilError).code).toBe(ErrorCodes.CUTOFF_BELOW_FLOOR);
    expect((e as CellvigilError).message).toContain('add a chemistry profile for that cell');
    expect((e as CellvigilError).message).toContain('--chemistries-file <file>');
  });

  it('the documented example, added to a copy of the shipped file, takes 2.2 V with the datasheet as source', () => {
    const text = `${readFileSync(SHIPPED, 'utf8')}\n${docExample()}`;
    const all = parseChemistries(text, 'my-cells.yaml');
    const cell = findChemistry(all, 'li-ion-hp20');
    expect(cell.floor_V_per_cell.value).toBe(2.0);
    expect(cell.floor_V_per_cell.source).toContain('datasheet');
    const c = resolveCutoff(cell, 1, 2.2);
    expect(c.perCell).toBe(2.2);
    // Its own floor still holds.
    expect(() => resolveCutoff(cell, 1, 1.9)).toThrow(CellvigilError);
  });
});
