import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { resolveCharge } from '../../src/chemistry/charge-limits.js';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import {
  DEFAULT_CHEMISTRIES_PATH,
  loadChemistries,
  parseChemistries,
} from '../../src/chemistry/chemistry-file.js';
import { CellvigilError } from '../../src/core/errors.js';

const shipped = loadChemistries();
const byId = (id: string) => findChemistry(shipped, id);

function caught(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('expected an error, got none');
}

describe('charge limits of the shipped profiles', () => {
  it('every shipped chemistry says how it may be charged, each value with a source', () => {
    for (const p of shipped) {
      expect(p.charge, p.id).toBeDefined();
      const c = p.charge!;
      expect(c.source).toMatch(/common practice|from memory|IEC \d/);
      if (c.method === 'none') continue;
      for (const s of [
        c.max_V_per_cell,
        c.min_temperature_C,
        c.max_temperature_C,
        c.default_current_C,
        c.max_current_C,
        c.timeout_h,
      ])
        expect(s.source).toMatch(/common practice|from memory|IEC \d/);
    }
  });

  // Trade values: Li-ion CC-CV to 4.20 V, 0–45 °C charge window, end of CV at 0.05 C
  // (common practice); LiFePO4 to 3.65 V (common practice); NiMH 0.1 It for 16 h
  // (IEC 61951-2, from memory); alkaline cells are primary (common practice).
  it.each([
    ['li-ion', 'cc-cv', 4.2],
    ['lifepo4', 'cc-cv', 3.65],
    ['lead-acid', 'cc-cv', 2.45],
    ['nimh', 'charger', 1.6],
    ['nicd', 'charger', 1.6],
  ] as const)('%s charges by %s with a ceiling of %s V per cell', (id, method, maxV) => {
    const c = byId(id).charge!;
    expect(c.method).toBe(method);
    if (c.method !== 'none') expect(c.max_V_per_cell.value).toBe(maxV);
  });

  it('Li-ion: 0–45 °C, 0.05 C termination, storage 3.8 V (common practice)', () => {
    const c = byId('li-ion').charge!;
    if (c.method === 'none') throw new Error('li-ion must be chargeable');
    expect([c.min_temperature_C.value, c.max_temperature_C.value]).toEqual([0, 45]);
    expect(c.termination_current_C?.value).toBe(0.05);
    expect(c.storage_V_per_cell?.value).toBe(3.8);
  });

  it('NiMH: 0.1 It for 16 h by default (IEC 61951-2, from memory)', () => {
    const r = resolveCharge(byId('nimh'), {}, 'test');
    expect(r).toMatchObject({ method: 'charger', current_C: 0.1, timeout_h: 16 });
    expect(r.termination_C).toBeNull();
  });
});

describe('charge ceilings no request can pass', () => {
  it('4.3 V per cell on a 4.2 V Li-ion is refused, naming the key and the ceiling (common practice)', () => {
    const e = caught(() => resolveCharge(byId('li-ion'), { V_per_cell: 4.3 }, 'p.yaml'));
    expect(e.code).toBe('CV_CONFIG_INVALID');
    expect(e.message).toContain('V_per_cell 4.3 V is above the li-ion ceiling of 4.2 V');
    expect(e.message).toContain('p.yaml, key V_per_cell');
  });

  it('4.2 V exactly is allowed; so is less', () => {
    expect(resolveCharge(byId('li-ion'), { V_per_cell: 4.2 }, 'p').V_per_cell).toBe(4.2);
    expect(resolveCharge(byId('li-ion'), { V_per_cell: 4.1 }, 'p').V_per_cell).toBe(4.1);
  });

  it('a charge current above max_current_C and a timeout above the profile are refused', () => {
    expect(caught(() => resolveCharge(byId('li-ion'), { current_C: 2 }, 'p')).message).toContain(
      'current_C 2 C is above the li-ion ceiling of 1 C',
    );
    expect(caught(() => resolveCharge(byId('li-ion'), { timeout_h: 9 }, 'p')).message).toContain(
      'timeout_h 9 h is above',
    );
    expect(caught(() => resolveCharge(byId('li-ion'), { current_C: 0 }, 'p')).message).toContain(
      'current_C 0 C is not a positive number',
    );
  });

  it('alkaline cells are never charged (common practice: primary cells)', () => {
    expect(caught(() => resolveCharge(byId('alkaline'), {}, 'p')).message).toContain(
      'must never be charged',
    );
  });

  it('a termination current at or above the charge current is refused', () => {
    const e = caught(() =>
      resolveCharge(byId('li-ion'), { current_C: 0.2, termination_C: 0.2 }, 'p'),
    );
    expect(e.message).toContain('termination current 0.2 C');
  });

  it('a charger-terminated chemistry takes no charge voltage', () => {
    expect(caught(() => resolveCharge(byId('nimh'), { V_per_cell: 1.5 }, 'p')).message).toContain(
      'ends by the charger',
    );
  });
});

describe('charge block in a chemistry file', () => {
  const text = readFileSync(DEFAULT_CHEMISTRIES_PATH, 'utf8');

  it('a charge voltage below nominal is refused with the key named', () => {
    const bad = text.replace(
      'max_V_per_cell:        { value: 4.2,',
      'max_V_per_cell:        { value: 3.5,',
    );
    const e = caught(() => parseChemistries(bad, 'c.yaml'));
    expect(e.message).toContain(
      'li-ion.charge.max_V_per_cell.value (3.5) must be above the nominal',
    );
  });

  it('a missing termination current for cc-cv is named', () => {
    const bad = text.replace(
      / {4}termination_current_C: \{ value: 0\.02, source: common practice \}\n/,
      '',
    );
    const e = caught(() => parseChemistries(bad, 'c.yaml'));
    expect(e.message).toContain(
      'lead-acid.charge.termination_current_C is missing for method cc-cv',
    );
  });

  it('a profile without a charge block still loads (files of older versions)', () => {
    const profiles = parseChemistries(
      `x:
  name: X
  nominal_V_per_cell:  { value: 3.6, source: common practice }
  cutoff_V_per_cell:   { value: 3.0, source: common practice }
  floor_V_per_cell:    { value: 2.5, source: common practice }
  max_rest_V_per_cell: { value: 4.25, source: common practice }
  min_rest_V_per_cell: { value: 2.0, source: from memory }
  max_temperature_C:   { value: 60, source: common practice }
  cautions: [careful]
`,
      'x.yaml',
    );
    expect(profiles[0]!.charge).toBeUndefined();
    expect(caught(() => resolveCharge(profiles[0]!, {}, 'p')).message).toContain(
      'no charge limits',
    );
  });
});
