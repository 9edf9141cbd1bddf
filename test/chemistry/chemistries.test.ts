import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import {
  DEFAULT_CHEMISTRIES_PATH,
  loadChemistries,
  parseChemistries,
} from '../../src/chemistry/chemistry-file.js';
import type { ChemistryProfile } from '../../src/chemistry/chemistry-types.js';
import { CellvigilError } from '../../src/core/errors.js';

const shipped = loadChemistries();
const byId = (id: string): ChemistryProfile => findChemistry(shipped, id);

/** Runs `fn`, expects a CellvigilError and returns it. */
function caught(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('expected an error, got none');
}

describe('shipped chemistry file', () => {
  it('loads from the package root and holds the six profiles', () => {
    expect(DEFAULT_CHEMISTRIES_PATH.replace(/\\/g, '/')).toMatch(/\/config\/chemistries\.yaml$/);
    expect(shipped.map((p) => p.id)).toEqual(
      expect.arrayContaining(['alkaline', 'nimh', 'nicd', 'li-ion', 'lifepo4', 'lead-acid']),
    );
  });

  it('gives every value a source and every profile cautions', () => {
    for (const p of shipped) {
      for (const f of [
        p.nominal_V_per_cell,
        p.cutoff_V_per_cell,
        p.floor_V_per_cell,
        p.max_rest_V_per_cell,
        p.min_rest_V_per_cell,
        p.max_temperature_C,
      ]) {
        expect(f.source).toMatch(/common practice|from memory|IEC \d/);
      }
      expect(p.cautions.length).toBeGreaterThan(0);
    }
  });

  // End-of-discharge voltages per cell: common practice unless
  // noted) and "Discharge test methods" (IEC clauses, from memory).
  it.each([
    ['alkaline', 0.9, 'common practice'], // common practice
    ['nimh', 1.0, 'IEC 61951-2, from memory of the clause'], // IEC 61951-2 end voltage, from memory
    ['nicd', 1.0, 'IEC 61951-1, from memory of the clause'], // IEC 61951-1 end voltage, from memory
    ['li-ion', 3.0, 'common practice'], // common practice
    ['lifepo4', 2.5, 'common practice'], // common practice
    ['lead-acid', 1.75, 'IEC 61056-1, from memory'], // IEC 61056-1 C20 to 1.75 V/cell, from memory
  ])('%s cutoff is %d V per cell (%s)', (id, volts, source) => {
    expect(byId(id).cutoff_V_per_cell).toEqual({ value: volts, source });
  });

  // Safety floors: common practice: alkaline 0.8 in low-rate
  // tests, Li-ion makers' absolute floor 2.5-2.75 (the lowest is used), LiFePO4 floor 2.0.
  it.each([
    ['alkaline', 0.8],
    ['li-ion', 2.5],
    ['lifepo4', 2.0],
  ])('%s floor is %d V per cell (common practice)', (id, volts) => {
    expect(byId(id).floor_V_per_cell).toEqual({ value: volts, source: 'common practice' });
  });

  // Highest discharge temperature: common practice:
  // Li-ion and LiFePO4 60 °C, NiMH 60 °C, alkaline about 50 °C, lead-acid 50 °C.
  it.each([
    ['li-ion', 60],
    ['lifepo4', 60],
    ['nimh', 60],
    ['alkaline', 50],
    ['lead-acid', 50],
  ])('%s highest temperature is %d °C (common practice)', (id, celsius) => {
    expect(byId(id).max_temperature_C).toEqual({ value: celsius, source: 'common practice' });
  });

  it('keeps floor <= cutoff < nominal < max rest and min rest < cutoff', () => {
    for (const p of shipped) {
      expect(p.floor_V_per_cell.value).toBeLessThanOrEqual(p.cutoff_V_per_cell.value);
      expect(p.cutoff_V_per_cell.value).toBeLessThan(p.nominal_V_per_cell.value);
      expect(p.nominal_V_per_cell.value).toBeLessThan(p.max_rest_V_per_cell.value);
      expect(p.min_rest_V_per_cell.value).toBeLessThan(p.cutoff_V_per_cell.value);
    }
  });

  it('warns about fire for lithium and hydrogen for lead-acid', () => {
    for (const id of ['li-ion', 'lifepo4']) {
      const text = byId(id).cautions.join(' ');
      expect(text).toMatch(/fire/);
      expect(text).toMatch(/unattended/);
      expect(text).toMatch(/swells/);
    }
    expect(byId('lead-acid').cautions.join(' ')).toMatch(/hydrogen/);
  });

  it('refuses an unknown chemistry id, listing the known ones', () => {
    const err = caught(() => findChemistry(shipped, 'li-po'));
    expect(err.code).toBe('CV_USAGE');
    expect(err.message).toContain('--chemistry');
    expect(err.message).toContain('li-ion');
  });
});

const GOOD = `
li-ion:
  name: Test lithium
  nominal_V_per_cell:  { value: 3.6,  source: common practice }
  cutoff_V_per_cell:   { value: 3.0,  source: common practice }
  floor_V_per_cell:    { value: 2.5,  source: common practice }
  max_rest_V_per_cell: { value: 4.25, source: common practice }
  min_rest_V_per_cell: { value: 2.0,  source: from memory }
  max_temperature_C:   { value: 60,   source: common practice }
  cautions: [ Keep it safe. ]
`;

function refused(text: string): CellvigilError {
  const err = caught(() => parseChemistries(text, 'bad.yaml'));
  expect(err.code).toBe('CV_CONFIG_INVALID');
  expect(err.exitCode).toBe(2);
  expect(err.message).toContain('bad.yaml');
  return err;
}

describe('parseChemistries', () => {
  it('accepts a minimal valid file', () => {
    const [p] = parseChemistries(GOOD, 'good.yaml');
    expect(p?.id).toBe('li-ion');
    expect(p?.cutoff_V_per_cell).toEqual({ value: 3.0, source: 'common practice' });
  });

  it('refuses an unknown key, naming it', () => {
    const err = refused(GOOD.replace('  cautions:', '  cutof_V: 2.9\n  cautions:'));
    expect(err.message).toContain('li-ion.cutof_V');
    expect(err.message).toMatch(/not a known key/);
  });

  it('refuses an unknown key inside a value', () => {
    const err = refused(GOOD.replace('value: 3.0,', 'value: 3.0, unit: V,'));
    expect(err.message).toContain('li-ion.cutoff_V_per_cell.unit');
  });

  it('refuses a value without a source', () => {
    const err = refused(GOOD.replace('{ value: 2.5,  source: common practice }', '{ value: 2.5 }'));
    expect(err.message).toContain('li-ion.floor_V_per_cell.source');
    expect(err.message).toMatch(/needs a source/);
  });

  it('refuses a bare number in place of a sourced value', () => {
    const err = refused(GOOD.replace('{ value: 2.5,  source: common practice }', '2.5'));
    expect(err.message).toContain('li-ion.floor_V_per_cell');
  });

  it('refuses a floor above the cutoff', () => {
    const err = refused(GOOD.replace('value: 2.5,', 'value: 3.1,'));
    expect(err.message).toContain('li-ion.floor_V_per_cell.value');
    expect(err.message).toMatch(/must not be above cutoff_V_per_cell/);
  });

  it('refuses a cutoff at nominal and a max rest below nominal', () => {
    expect(refused(GOOD.replace('value: 3.0,', 'value: 3.6,')).message).toContain(
      'li-ion.cutoff_V_per_cell.value',
    );
    expect(refused(GOOD.replace('value: 4.25,', 'value: 3.5,')).message).toContain(
      'li-ion.max_rest_V_per_cell.value',
    );
  });

  it('refuses a min rest at or above the cutoff', () => {
    const err = refused(GOOD.replace('value: 2.0,', 'value: 3.0,'));
    expect(err.message).toContain('li-ion.min_rest_V_per_cell.value');
  });

  it('refuses a temperature outside 0..100 °C', () => {
    expect(refused(GOOD.replace('value: 60,', 'value: 160,')).message).toContain(
      'li-ion.max_temperature_C.value',
    );
    expect(refused(GOOD.replace('value: 60,', 'value: 0,')).message).toContain(
      'li-ion.max_temperature_C.value',
    );
  });

  it.each([['"3.0"'], ['three'], ['.nan'], ['.inf'], ['null']])(
    'refuses a non-numeric cutoff %s',
    (bad) => {
      const err = refused(GOOD.replace('value: 3.0,', `value: ${bad},`));
      expect(err.message).toContain('li-ion.cutoff_V_per_cell.value');
      expect(err.message).toMatch(/finite number/);
    },
  );

  it('refuses a missing field, an empty file, a bad id and broken YAML', () => {
    expect(refused(GOOD.replace(/ {2}min_rest_V_per_cell.*\n/, '')).message).toContain(
      'li-ion.min_rest_V_per_cell',
    );
    expect(refused('').message).toContain('(top level)');
    expect(refused(GOOD.replace('li-ion:', 'Li Ion:')).message).toContain('Li Ion');
    expect(refused(GOOD.replace('cautions: [', 'cautions: [[')).message).toMatch(/not valid YAML/);
    expect(refused(`${GOOD}\nli-ion:\n  name: again\n`).message).toMatch(/not valid YAML/);
  });

  it('refuses empty cautions and an over-long source', () => {
    expect(refused(GOOD.replace('cautions: [ Keep it safe. ]', 'cautions: []')).message).toContain(
      'li-ion.cautions needs at least one entry',
    );
    const long = 'x'.repeat(121);
    expect(refused(GOOD.replace('source: from memory', `source: ${long}`)).message).toContain(
      'li-ion.min_rest_V_per_cell.source is too long',
    );
  });

  it('loadChemistries names a missing file (CV_CONFIG_READ) and an invalid one', () => {
    const dir = mkdtempSync(join(tmpdir(), 'cellvigil-chem-'));
    const missing = join(dir, 'nope.yaml');
    const err = caught(() => loadChemistries(missing));
    expect(err.code).toBe('CV_CONFIG_READ');
    expect(err.exitCode).toBe(2);
    expect(err.message).toContain(missing);

    const bad = join(dir, 'bad.yaml');
    writeFileSync(bad, GOOD.replace('  cautions:', '  colour: red\n  cautions:'));
    const err2 = caught(() => loadChemistries(bad));
    expect(err2.code).toBe('CV_CONFIG_INVALID');
    expect(err2.message).toContain(bad);
    expect(err2.message).toContain('li-ion.colour');
  });
});
