import { describe, expect, it } from 'vitest';
import { loadChemistries, parseChemistries } from '../../src/chemistry/chemistry-file.js';
import { formatChemistryTable, TABLE_WIDTH } from '../../src/chemistry/format.js';

const all = loadChemistries();

describe('formatChemistryTable', () => {
  const text = formatChemistryTable(all);
  const lines = text.trimEnd().split('\n');

  it('fits 100 columns, with cautions too', () => {
    expect(TABLE_WIDTH).toBe(100);
    for (const line of formatChemistryTable(all, { cautions: true }).split('\n')) {
      expect(line.length).toBeLessThanOrEqual(100);
    }
  });

  it('lists every chemistry with its limits and their sources', () => {
    for (const p of all) {
      expect(lines.some((l) => l.startsWith(`${p.id} `) && l.includes(p.name))).toBe(true);
    }
    expect(text).toMatch(/default cutoff\s+1\.00 V\s+IEC 61951-2, from memory of the clause/);
    expect(text).toMatch(/default cutoff\s+1\.75 V\s+IEC 61056-1, from memory/);
    expect(text).toMatch(/cutoff floor\s+2\.50 V\s+common practice/);
    expect(text).toMatch(/highest temperature\s+60 °C\s+common practice/);
  });

  it('says the floors cannot be overridden', () => {
    expect(text).toMatch(/floors are fixed/i);
    expect(text).toMatch(/nothing overrides/);
  });

  it('shows cautions only when asked', () => {
    expect(text).not.toContain('hydrogen');
    expect(formatChemistryTable(all, { cautions: true })).toContain('hydrogen');
  });

  it('wraps a long source and a long name within the width', () => {
    const long = 'word '.repeat(22).trim(); // 109 characters: wraps in the source column
    const [p] = parseChemistries(
      `x:
  name: ${long.slice(0, 80)}
  nominal_V_per_cell:  { value: 1.2, source: ${long} }
  cutoff_V_per_cell:   { value: 1.0, source: common practice }
  floor_V_per_cell:    { value: 0.9, source: common practice }
  max_rest_V_per_cell: { value: 1.5, source: from memory }
  min_rest_V_per_cell: { value: 0.5, source: from memory }
  max_temperature_C:   { value: 45.5, source: from memory }
  cautions: [ Careful. ]
`,
      'long.yaml',
    );
    const out = formatChemistryTable(p ? [p] : []);
    for (const line of out.split('\n')) expect(line.length).toBeLessThanOrEqual(100);
    expect(out).toContain('45.5 °C');
    expect(out.split('\n').filter((l) => l.includes('word')).length).toBeGreaterThan(2);
  });
});

describe('charge limits in the table', () => {
  const text = formatChemistryTable(all);

  it('shows each chemistry charge limit with its source (Li-ion 4.20 V, 0–45 °C, 0.05 C: common practice)', () => {
    expect(text).toMatch(/charge method\s+cc-cv\s+common practice/);
    expect(text).toMatch(/charge voltage ceiling\s+4\.20 V\s+common practice/);
    expect(text).toMatch(/charge window, highest\s+45 °C\s+common practice/);
    expect(text).toMatch(/termination current\s+0\.05 C\s+common practice/);
    expect(text).toMatch(/charge\s+never\s+common practice \(primary cells/);
    expect(text).toMatch(/charge timeout\s+16 h\s+IEC 61951-2, from memory of the clause/);
  });

  it('says the charge ceilings cannot be overridden', () => {
    expect(text).toMatch(/Charge ceilings are fixed/);
  });
});
