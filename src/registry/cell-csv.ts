/**
 * A CSV file of cells to register (RFC 4180, a header row): cell_id, chemistry, rated_Ah (or
 * rated_mAh), and optionally source and notes. The whole file is checked before anything is
 * registered; the first bad value is named by file, line and column.
 */
import { parse } from 'csv-parse/sync';
import type { CsvError } from 'csv-parse';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { CellInfo } from './history.js';
import { CELL_ID_PATTERN } from './run-record.js';

const KNOWN = ['cell_id', 'chemistry', 'rated_Ah', 'rated_mAh', 'source', 'notes'] as const;
const FIX =
  'Correct the value named and import the file again; nothing of this file was registered.';

function bad(file: string, line: number, column: number, name: string, what: string): Error {
  return makeError(
    ErrorCodes.REGISTRY_CSV,
    what,
    `${file}, line ${line}, column ${column} (${name})`,
    FIX,
  );
}

/** Checks one cell's values; `problem` is null when they are fine. */
export function checkCell(
  c: { cell_id: string; chemistry: string; rated_Ah: number },
  chemistries: readonly string[],
): { key: 'cell_id' | 'chemistry' | 'rated_Ah'; problem: string } | null {
  if (!CELL_ID_PATTERN.test(c.cell_id))
    return {
      key: 'cell_id',
      problem: `cell id "${c.cell_id}" is not 1 to 64 letters, digits or . _ : / - (starting with a letter or digit)`,
    };
  if (!chemistries.includes(c.chemistry))
    return {
      key: 'chemistry',
      problem: `chemistry "${c.chemistry}" is not one of ${chemistries.join(', ')}`,
    };
  if (!(Number.isFinite(c.rated_Ah) && c.rated_Ah > 0 && c.rated_Ah < 10_000))
    return {
      key: 'rated_Ah',
      problem: `rated capacity "${c.rated_Ah}" is not a positive number of Ah`,
    };
  return null;
}

interface Parsed {
  record: string[];
  info: { lines: number };
}

function parseRows(text: string, file: string): Parsed[] {
  try {
    return parse(text, {
      info: true,
      bom: true,
      skip_empty_lines: true,
      trim: true,
    }) as unknown as Parsed[];
  } catch (e) {
    const err = e as CsvError & { lines?: number; column?: number | string };
    const line = typeof err.lines === 'number' ? err.lines : 0;
    throw makeError(
      ErrorCodes.REGISTRY_CSV,
      `not valid CSV: ${err.message}`,
      `${file}, line ${line}`,
      FIX,
    );
  }
}

/** Parses a cells CSV into cells to register (registered_at: `nowIso`); throws on the first bad value. */
export function parseCellCsv(
  text: string,
  file: string,
  chemistries: readonly string[],
  nowIso: string,
): CellInfo[] {
  const rows = parseRows(text, file);
  const header = rows[0]?.record;
  if (header === undefined) throw bad(file, 1, 1, 'header', 'the file is empty');
  header.forEach((name, i) => {
    if (!(KNOWN as readonly string[]).includes(name))
      throw bad(
        file,
        1,
        i + 1,
        name,
        `unknown column "${name}"; the columns are ${KNOWN.join(', ')}`,
      );
  });
  const col = (name: string): number => header.indexOf(name);
  for (const need of ['cell_id', 'chemistry'])
    if (col(need) < 0)
      throw bad(file, 1, header.length + 1, need, `the header has no ${need} column`);
  const ratedCol = col('rated_Ah') >= 0 ? col('rated_Ah') : col('rated_mAh');
  if (ratedCol < 0 || (col('rated_Ah') >= 0 && col('rated_mAh') >= 0))
    throw bad(
      file,
      1,
      header.length + 1,
      'rated_Ah',
      'the header needs exactly one of rated_Ah and rated_mAh',
    );
  const scale = header[ratedCol] === 'rated_mAh' ? 1e-3 : 1;
  return rows.slice(1).map(({ record, info }) => {
    const get = (name: string): string => (col(name) >= 0 ? (record[col(name)] ?? '') : '');
    const ratedText = record[ratedCol] ?? '';
    const cell: CellInfo = {
      cell_id: get('cell_id'),
      chemistry: get('chemistry'),
      rated_Ah: ratedText.trim() === '' ? NaN : Number(ratedText) * scale,
      source: get('source'),
      notes: get('notes'),
      registered_at: nowIso,
    };
    const problem = checkCell(cell, chemistries);
    if (problem !== null) {
      const c = problem.key === 'rated_Ah' ? ratedCol : col(problem.key);
      throw bad(file, info.lines, c + 1, header[c] ?? problem.key, problem.problem);
    }
    return cell;
  });
}
