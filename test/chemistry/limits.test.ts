import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import {
  checkRestingVoltage,
  fitsFor,
  resolveCutoff,
  validateCells,
  type RestCheck,
} from '../../src/chemistry/limits.js';
import { CellvigilError } from '../../src/core/errors.js';

const all = loadChemistries();
const liIon = findChemistry(all, 'li-ion');
const lfp = findChemistry(all, 'lifepo4');
const nimh = findChemistry(all, 'nimh');
const lead = findChemistry(all, 'lead-acid');

function caught(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('expected an error, got none');
}

function refusal(r: RestCheck): Extract<RestCheck, { ok: false }> {
  if (r.ok) throw new Error('expected a refusal');
  expect(r.error.code).toBe('CV_PRECHECK_REFUSED');
  expect(r.error.exitCode).toBe(2);
  return r;
}

describe('validateCells', () => {
  it('accepts whole numbers 1..64', () => {
    expect(validateCells(1)).toBe(1);
    expect(validateCells(64)).toBe(64);
  });
  it.each([[0], [65], [2.5], [-1], [Number.NaN]])('refuses %d', (n) => {
    const err = caught(() => validateCells(n));
    expect(err.code).toBe('CV_USAGE');
    expect(err.message).toContain('--cells');
  });
});

describe('resolveCutoff', () => {
  it('scales the default with the cell count: 3 × Li-ion 3.0 V = 9.0 V (common practice)', () => {
    expect(resolveCutoff(liIon, 3)).toEqual({
      perCell: 3.0,
      total: 9.0,
      source: 'common practice',
      fromUser: false,
    });
  });

  it('6 × lead-acid 1.75 V = 10.5 V for a 12 V block (IEC 61056-1, from memory)', () => {
    expect(resolveCutoff(lead, 6).total).toBe(10.5);
  });

  it('accepts a request at or above the floor', () => {
    expect(resolveCutoff(liIon, 2, 2.5)).toMatchObject({
      perCell: 2.5,
      total: 5.0,
      fromUser: true,
    });
    expect(resolveCutoff(liIon, 3, 3.3).total).toBeCloseTo(9.9, 9);
  });

  it('refuses a request below the floor, naming the floor and its source', () => {
    const err = caught(() => resolveCutoff(liIon, 1, 2.4));
    expect(err.code).toBe('CV_CUTOFF_BELOW_FLOOR');
    expect(err.exitCode).toBe(2);
    expect(err.message).toContain('2.50 V');
    expect(err.message).toContain('common practice');
    expect(err.message).toContain('--cutoff');
  });

  it('refuses LiFePO4 below its 2.0 V floor (common practice) and names a live command', () => {
    const err = caught(() => resolveCutoff(lfp, 4, 1.9, 'set-cutoff'));
    expect(err.code).toBe('CV_CUTOFF_BELOW_FLOOR');
    expect(err.message).toContain('set-cutoff');
  });

  it('refuses a cutoff at or above nominal (a whole-string value given by mistake)', () => {
    const err = caught(() => resolveCutoff(liIon, 3, 9.0));
    expect(err.code).toBe('CV_USAGE');
    expect(err.message).toMatch(/nominal/);
    expect(caught(() => resolveCutoff(liIon, 1, 3.6)).code).toBe('CV_USAGE');
  });

  it('refuses a non-finite request and a bad cell count', () => {
    expect(caught(() => resolveCutoff(liIon, 1, Number.NaN)).code).toBe('CV_USAGE');
    expect(caught(() => resolveCutoff(liIon, 0)).code).toBe('CV_USAGE');
  });
});

describe('checkRestingVoltage', () => {
  it('accepts a charged Li-ion cell', () => {
    expect(checkRestingVoltage(liIon, 1, 4.1, 3.0, all)).toEqual({ ok: true });
  });

  it('accepts a 12.7 V block on lead-acid × 6 (2.12 V per cell, common practice)', () => {
    expect(checkRestingVoltage(lead, 6, 12.7, 1.75, all)).toEqual({ ok: true });
  });

  it('accepts exactly the highest resting voltage of a string (3 × 4.25 V)', () => {
    expect(checkRestingVoltage(liIon, 3, 12.75, 3.0).ok).toBe(true);
  });

  it('refuses a Li-ion cell (4.1 V) on a NiMH profile and says what it fits', () => {
    const r = refusal(checkRestingVoltage(nimh, 1, 4.1, 1.0, all));
    expect(r.reason).toBe('above_max_rest');
    expect(r.error.message).toContain(
      'more than 1 cell of nimh can hold at rest (max 1.50 V/cell)',
    );
    expect(r.error.message).toMatch(/Wrong chemistry or cell count\?/);
    expect(r.error.message).toContain('1 × li-ion');
    expect(r.fits).toContainEqual({ id: 'li-ion', minCells: 1, maxCells: 1 });
  });

  it('refuses a charged LiFePO4 pack counted one cell short', () => {
    const r = refusal(checkRestingVoltage(lfp, 3, 13.3, 2.5, all));
    expect(r.reason).toBe('above_max_rest');
    expect(r.error.message).toMatch(/fits 4–5 × lifepo4/);
    expect(r.fits).toContainEqual({ id: 'lifepo4', minCells: 4, maxCells: 5 });
  });

  it('refuses 0 V as a missing, reversed or ruined cell', () => {
    const r = refusal(checkRestingVoltage(liIon, 1, 0, 3.0, all));
    expect(r.reason).toBe('below_min_rest');
    expect(r.error.message).toMatch(/missing, reversed or ruined cell/);
  });

  it('refuses a Li-ion cell that rests at 1.2 V (below 2.0 V, from memory)', () => {
    expect(refusal(checkRestingVoltage(liIon, 1, 1.2, 3.0)).reason).toBe('below_min_rest');
  });

  it('refuses a negative reading as a reversed connection', () => {
    const r = refusal(checkRestingVoltage(liIon, 1, -3.7, 3.0, all));
    expect(r.reason).toBe('reversed');
    expect(r.error.message).toMatch(/reversed connection/);
  });

  it('refuses a cell already at or below the cutoff: nothing to discharge', () => {
    const r = refusal(checkRestingVoltage(liIon, 1, 2.9, 3.0, all));
    expect(r.reason).toBe('at_or_below_cutoff');
    expect(r.error.message).toMatch(/nothing to discharge/);
    expect(refusal(checkRestingVoltage(liIon, 2, 6.0, 3.0)).reason).toBe('at_or_below_cutoff');
    // a user cutoff above the default is honoured too
    expect(refusal(checkRestingVoltage(liIon, 1, 3.3, 3.4)).reason).toBe('at_or_below_cutoff');
  });

  it('refuses a reading that is not a number', () => {
    expect(refusal(checkRestingVoltage(liIon, 1, Number.NaN, 3.0)).reason).toBe('not_a_reading');
  });
});

describe('fitsFor', () => {
  it('4.12 V fits 1 × li-ion and not LiFePO4', () => {
    const fits = fitsFor(all, 4.12);
    expect(fits).toContainEqual({ id: 'li-ion', minCells: 1, maxCells: 1 });
    expect(fits.find((f) => f.id === 'lifepo4')).toBeUndefined();
  });

  it('12.7 V fits 6 × lead-acid and 4 × lifepo4', () => {
    const fits = fitsFor(all, 12.7);
    const lf = fits.find((f) => f.id === 'lead-acid');
    expect(lf && lf.minCells <= 6 && lf.maxCells >= 6).toBe(true);
    const lp = fits.find((f) => f.id === 'lifepo4');
    expect(lp && lp.minCells <= 4 && lp.maxCells >= 4).toBe(true);
  });

  it('nothing fits 0 V or a negative reading', () => {
    expect(fitsFor(all, 0)).toEqual([]);
    expect(fitsFor(all, -1)).toEqual([]);
  });
});
