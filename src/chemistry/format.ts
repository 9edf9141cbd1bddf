import type { ChemistryProfile, Sourced } from './chemistry-types.js';
import type { SourcedField } from './chemistries.js';
import type { ChargeField } from './charge-limits.js';
import { meaningful } from '../core/meaningful.js';

/** Widest line the table produces. */
export const TABLE_WIDTH = 100;

const ROWS: readonly { field: SourcedField; label: string; unit: 'V' | '°C' }[] = [
  { field: 'nominal_V_per_cell', label: 'nominal voltage', unit: 'V' },
  { field: 'cutoff_V_per_cell', label: 'default cutoff', unit: 'V' },
  { field: 'floor_V_per_cell', label: 'cutoff floor', unit: 'V' },
  { field: 'max_rest_V_per_cell', label: 'highest resting voltage', unit: 'V' },
  { field: 'min_rest_V_per_cell', label: 'lowest resting voltage', unit: 'V' },
  { field: 'max_temperature_C', label: 'highest temperature', unit: '°C' },
];

const INDENT = '    ';
const LABEL_WIDTH = 26;
const VALUE_WIDTH = 10;

/** Greedy word wrap; a word longer than the width is cut. */
function wrap(text: string, width: number): string[] {
  const lines: string[] = [];
  let line = '';
  for (let word of text.split(/\s+/).filter((w) => w !== '')) {
    while (word.length > width) {
      if (line !== '') {
        lines.push(line);
        line = '';
      }
      lines.push(word.slice(0, width));
      word = word.slice(width);
    }
    if (line === '') line = word;
    else if (line.length + 1 + word.length <= width) line += ` ${word}`;
    else {
      lines.push(line);
      line = word;
    }
  }
  if (line !== '' || lines.length === 0) lines.push(line);
  return lines;
}

function formatValue(s: Sourced, unit: 'V' | '°C'): string {
  if (unit === '°C') return `${Number.isInteger(s.value) ? s.value : s.value.toFixed(1)} °C`;
  const v = (Math.round(s.value * 1000) / 1000).toFixed(3);
  return `${v.endsWith('0') ? v.slice(0, -1) : v} V`;
}

const CHARGE_ROWS: readonly { field: ChargeField; label: string; unit: string }[] = [
  { field: 'max_V_per_cell', label: 'charge voltage ceiling', unit: 'V' },
  { field: 'min_temperature_C', label: 'charge window, lowest', unit: '°C' },
  { field: 'max_temperature_C', label: 'charge window, highest', unit: '°C' },
  { field: 'default_current_C', label: 'charge current', unit: 'C' },
  { field: 'max_current_C', label: 'highest charge current', unit: 'C' },
  { field: 'termination_current_C', label: 'termination current', unit: 'C' },
  { field: 'timeout_h', label: 'charge timeout', unit: 'h' },
  { field: 'storage_V_per_cell', label: 'storage voltage', unit: 'V' },
];

/** The charge block as table rows: its method, then each limit it has. */
function chargeRows(p: ChemistryProfile): { label: string; value: string; source: string }[] {
  const c = p.charge;
  if (c === undefined) return [];
  if (c.method === 'none') return [{ label: 'charge', value: 'never', source: c.source }];
  const rows: { label: string; value: string; source: string }[] = [
    { label: 'charge method', value: c.method, source: c.source },
  ];
  for (const r of CHARGE_ROWS) {
    const s = c[r.field];
    if (s === undefined) continue;
    const value = r.unit === 'V' ? formatValue(s, 'V') : `${meaningful(s.value)} ${r.unit}`;
    rows.push({ label: r.label, value, source: s.source });
  }
  return rows;
}

export interface ChemistryTableOptions {
  /** Also list each chemistry's cautions (off by default). */
  cautions?: boolean;
}

/**
 * The text `cellvigil chemistries` prints: one block per chemistry with each limit and its
 * source, then a note that the cutoff floors cannot be overridden. No line passes 100 columns.
 */
export function formatChemistryTable(
  profiles: readonly ChemistryProfile[],
  options: ChemistryTableOptions = {},
): string {
  const out: string[] = [];
  out.push(
    ...wrap(
      'Chemistry profiles. Voltages are per cell; N cells in series scale them by N.',
      TABLE_WIDTH,
    ),
  );
  const sourceCol = INDENT.length + LABEL_WIDTH + VALUE_WIDTH;
  const sourceWidth = TABLE_WIDTH - sourceCol;
  out.push('', `${INDENT}${'limit'.padEnd(LABEL_WIDTH)}${'value'.padEnd(VALUE_WIDTH)}source`);

  const idWidth = Math.min(16, Math.max(...profiles.map((p) => p.id.length), 0)) + 2;
  for (const p of profiles) {
    out.push('');
    const idCol = Math.max(idWidth, p.id.length + 2);
    const head = wrap(p.name, TABLE_WIDTH - idCol);
    out.push(`${p.id.padEnd(idCol)}${head[0] ?? ''}`);
    for (const rest of head.slice(1)) out.push(`${' '.repeat(idCol)}${rest}`);
    const push = (label: string, value: string, source: string): void => {
      const src = wrap(source, sourceWidth);
      out.push(`${INDENT}${label.padEnd(LABEL_WIDTH)}${value.padEnd(VALUE_WIDTH)}${src[0] ?? ''}`);
      for (const more of src.slice(1)) out.push(`${' '.repeat(sourceCol)}${more}`);
    };
    for (const row of ROWS)
      push(row.label, formatValue(p[row.field], row.unit), p[row.field].source);
    for (const r of chargeRows(p)) push(r.label, r.value, r.source);
    if (options.cautions === true && p.cautions.length > 0) {
      out.push(`${INDENT}cautions:`);
      for (const c of p.cautions) {
        const lines = wrap(c, TABLE_WIDTH - INDENT.length - 4);
        out.push(`${INDENT}  - ${lines[0] ?? ''}`);
        for (const more of lines.slice(1)) out.push(`${INDENT}    ${more}`);
      }
    }
  }
  out.push('');
  out.push(
    ...wrap(
      'Cutoff floors are fixed: a --cutoff option or live set-cutoff request below a floor is ' +
        'refused, and nothing overrides that. Charge ceilings are fixed too: a program asking ' +
        'more is refused.',
      TABLE_WIDTH,
    ),
  );
  out.push(
    ...wrap(
      'Sources: a standard, "common practice" (a fact of the trade with no single source) or ' +
        '"from memory" (recalled, not checked against a text). Check the cell maker\'s datasheet.',
      TABLE_WIDTH,
    ),
  );
  return `${out.join('\n')}\n`;
}
