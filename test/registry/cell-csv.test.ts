import { describe, expect, it } from 'vitest';
import { parseCellCsv } from '../../src/registry/cell-csv.js';

const CHEM = ['li-ion', 'nimh'];
const NOW = '2026-12-01T00:00:00.000Z';

function failure(text: string): string {
  try {
    parseCellCsv(text, 'cells.csv', CHEM, NOW);
  } catch (e) {
    return `${(e as { code: string }).code}: ${(e as Error).message}`;
  }
  throw new Error('no error');
}

describe('cells CSV (RFC 4180)', () => {
  it('reads quoted fields with commas, line breaks and doubled quotes (RFC 4180 section 2)', () => {
    const cells = parseCellCsv(
      'cell_id,chemistry,rated_mAh,source,notes\r\nA1,li-ion,2600,"pack ""B"", left","two\r\nlines"\r\nA2,nimh,2000,,\r\n',
      'cells.csv',
      CHEM,
      NOW,
    );
    expect(cells).toEqual([
      {
        cell_id: 'A1',
        chemistry: 'li-ion',
        rated_Ah: 2.6,
        source: 'pack "B", left',
        notes: 'two\r\nlines',
        registered_at: NOW,
      },
      { cell_id: 'A2', chemistry: 'nimh', rated_Ah: 2, source: '', notes: '', registered_at: NOW },
    ]);
  });

  it('names file, line and column of a bad value', () => {
    expect(failure('cell_id,chemistry,rated_Ah\nA1,li-ion,2.6\nA2,li-ion,-1\n')).toBe(
      'CV_REGISTRY_CSV: rated capacity "-1" is not a positive number of Ah (cells.csv, line 3, column 3 (rated_Ah)). Correct the value named and import the file again; nothing of this file was registered.',
    );
    expect(failure('cell_id,chemistry,rated_Ah\nA1,lithium,2.6\n')).toMatch(
      /line 2, column 2 \(chemistry\)/,
    );
    expect(failure('chemistry,cell_id,rated_Ah\nli-ion,bad id!,2.6\n')).toMatch(
      /line 2, column 2 \(cell_id\)/,
    );
    expect(failure('cell_id,chemistry,rated_Ah,colour\nA1,li-ion,2.6,red\n')).toMatch(
      /line 1, column 4 \(colour\)/,
    );
    expect(failure('cell_id,chemistry,rated_Ah\nA1,li-ion,2.6\nA2,li-ion\n')).toMatch(
      /not valid CSV.*line 3/,
    );
    expect(failure('cell_id,chemistry,rated_Ah\nA1,li-ion,"2.6\n')).toMatch(/not valid CSV/);
  });
});
