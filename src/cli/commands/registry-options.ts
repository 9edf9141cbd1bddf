/** Options shared by the `cells` and `pack` commands: where the registry is, grade rules, filters. */
import type { Argv } from 'yargs';
import { ErrorCodes, makeError } from '../../core/errors.js';
import { DEFAULT_GRADES_FILE } from '../../registry/grade-rules.js';
import type { ListRequest } from '../../registry/cell-queries.js';
import { SORT_KEYS, type CellSortKey } from '../../registry/registry-db.js';
import { defaultRegistryPath } from '../../registry/registry-path.js';

export interface RegistryArgs {
  runs: string;
  registry: string | undefined;
  grades: string;
}

/** `--registry`, as every command that reads or files into the registry takes it. */
export const registryOption = {
  type: 'string',
  describe: 'The cell registry database file (a run with a cell id is filed in it as it ends)',
  defaultDescription: '<beside --runs>/cellvigil-registry.sqlite',
} as const;

export function withRegistryOptions<T>(y: Argv<T>): Argv<T & RegistryArgs> {
  return y
    .option('runs', {
      type: 'string',
      default: 'runs',
      describe:
        'The folder of run folders (the registry lives beside it unless --registry is given)',
    })
    .option('registry', registryOption)
    .option('grades', {
      type: 'string',
      default: DEFAULT_GRADES_FILE,
      defaultDescription: 'config/grades.yaml',
      describe: 'Grade rules file',
    }) as Argv<T & RegistryArgs>;
}

export function registryPathOf(a: RegistryArgs): string {
  return a.registry ?? defaultRegistryPath(a.runs);
}

export interface FilterArgs {
  chemistry: string | undefined;
  'min-capacity': number | undefined;
  'max-capacity': number | undefined;
  'min-resistance': number | undefined;
  'max-resistance': number | undefined;
  'min-health': number | undefined;
  'max-health': number | undefined;
  'tested-after': string | undefined;
  'tested-before': string | undefined;
  untested: boolean;
  grade: string[] | undefined;
}

export function withFilterOptions<T>(y: Argv<T>): Argv<T & FilterArgs> {
  return y
    .option('chemistry', { type: 'string', describe: 'Only cells of this chemistry' })
    .option('min-capacity', { type: 'number', describe: 'Latest capacity at least this, Ah' })
    .option('max-capacity', { type: 'number', describe: 'Latest capacity at most this, Ah' })
    .option('min-resistance', { type: 'number', describe: 'DC resistance at least this, Ω' })
    .option('max-resistance', { type: 'number', describe: 'DC resistance at most this, Ω' })
    .option('min-health', { type: 'number', describe: 'State of health at least this, % of rated' })
    .option('max-health', { type: 'number', describe: 'State of health at most this, % of rated' })
    .option('tested-after', {
      type: 'string',
      describe: 'Last tested on or after this date (YYYY-MM-DD)',
    })
    .option('tested-before', {
      type: 'string',
      describe: 'Last tested before this date (YYYY-MM-DD)',
    })
    .option('untested', { type: 'boolean', default: false, describe: 'Only cells never tested' })
    .option('grade', {
      type: 'string',
      array: true,
      describe: 'Only cells of these grades (A B …, recycle, ungraded)',
    }) as Argv<T & FilterArgs>;
}

function date(text: string | undefined, option: string): number | undefined {
  if (text === undefined) return undefined;
  const ms = Date.parse(text);
  if (!Number.isFinite(ms))
    throw makeError(
      ErrorCodes.USAGE,
      `"${text}" is not a date`,
      option,
      'Give a date as YYYY-MM-DD.',
    );
  return ms;
}

export function listRequestOf(a: FilterArgs): ListRequest {
  const f: ListRequest['filter'] = {};
  const set = <K extends keyof ListRequest['filter']>(
    k: K,
    v: ListRequest['filter'][K] | undefined,
  ): void => {
    if (v !== undefined) f[k] = v;
  };
  set('chemistry', a.chemistry);
  set('minCapacityAh', a['min-capacity']);
  set('maxCapacityAh', a['max-capacity']);
  set('minResistanceOhm', a['min-resistance']);
  set('maxResistanceOhm', a['max-resistance']);
  set('minSoh', a['min-health'] === undefined ? undefined : a['min-health'] / 100);
  set('maxSoh', a['max-health'] === undefined ? undefined : a['max-health'] / 100);
  set('testedAfterMs', date(a['tested-after'], '--tested-after'));
  set('testedBeforeMs', date(a['tested-before'], '--tested-before'));
  if (a.untested) f.untested = true;
  const grades = a.grade?.flatMap((g) => g.split(',')).filter(Boolean);
  return { filter: f, ...(grades !== undefined && grades.length > 0 ? { grades } : {}) };
}

export const SORT_CHOICES: readonly CellSortKey[] = SORT_KEYS;

/** The filter as the user gave it, for a page's subtitle. */
export function filterText(a: FilterArgs): string {
  const parts: string[] = [];
  const add = (name: string, v: unknown): void => {
    if (v !== undefined && v !== false)
      parts.push(`--${name} ${Array.isArray(v) ? v.join(',') : String(v)}`);
  };
  for (const k of [
    'chemistry',
    'min-capacity',
    'max-capacity',
    'min-resistance',
    'max-resistance',
    'min-health',
    'max-health',
    'tested-after',
    'tested-before',
    'grade',
  ] as const)
    add(k, a[k]);
  if (a.untested) parts.push('--untested');
  return parts.length > 0 ? `graded cells with ${parts.join(' ')}` : 'all graded cells';
}
