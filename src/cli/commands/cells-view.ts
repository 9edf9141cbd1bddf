import type { Argv, CommandModule } from 'yargs';
import { cellsCsv, listGraded, runsCsv, showCell } from '../../registry/cell-queries.js';
import { historyText, listText } from '../../registry/cell-text.js';
import { loadGradeRules } from '../../registry/grade-rules.js';
import { historyPage } from '../../registry/history-page.js';
import type { CellSortKey } from '../../registry/registry-db.js';
import {
  listRequestOf,
  registryPathOf,
  SORT_CHOICES,
  withFilterOptions,
  withRegistryOptions,
  type FilterArgs,
  type RegistryArgs,
} from './registry-options.js';
import { writeOutput } from './write-output.js';

interface ListArgs extends RegistryArgs, FilterArgs {
  sort: CellSortKey;
  desc: boolean;
  limit: number | undefined;
  csv: string | undefined;
}

export const cellsListCommand: CommandModule<object, ListArgs> = {
  command: 'list',
  describe: 'List registered cells with their latest figures and grade, filtered and sorted',
  builder: (y) =>
    withFilterOptions(withRegistryOptions(y))
      .option('sort', { choices: SORT_CHOICES, default: 'id' as CellSortKey, describe: 'Sort by' })
      .option('desc', { type: 'boolean', default: false, describe: 'Largest (or latest) first' })
      .option('limit', { type: 'number', describe: 'At most this many cells' })
      .option('csv', {
        type: 'string',
        describe: 'Also write the list to this CSV file',
      }) as Argv<ListArgs>,
  handler: async (a) => {
    const rules = await loadGradeRules(a.grades);
    const rows = listGraded(
      registryPathOf(a),
      {
        ...listRequestOf(a),
        sort: a.sort,
        descending: a.desc,
        ...(a.limit !== undefined ? { limit: a.limit } : {}),
      },
      rules,
    );
    process.stdout.write(`${listText(rows)}\n${rows.length} cell(s)\n`);
    if (a.csv !== undefined) await writeOutput(a.csv, cellsCsv(rows));
  },
};

interface ShowArgs extends RegistryArgs {
  id: string;
  page: string | undefined;
}

export const cellsShowCommand: CommandModule<object, ShowArgs> = {
  command: 'show <id>',
  describe: "One cell's history: every run, state of health, fade per year, projected end of life",
  builder: (y) =>
    withRegistryOptions(y)
      .positional('id', { type: 'string', demandOption: true, describe: 'The cell id' })
      .option('page', {
        type: 'string',
        describe: 'Also write the history page (HTML) here',
      }) as Argv<ShowArgs>,
  handler: async (a) => {
    const rules = await loadGradeRules(a.grades);
    const view = showCell(registryPathOf(a), a.id, rules);
    process.stdout.write(historyText(view));
    if (a.page !== undefined) {
      await writeOutput(a.page, historyPage(view.history, view.grade, new Date().toISOString()));
      process.stdout.write(`wrote ${a.page}\n`);
    }
  },
};

interface ExportArgs extends RegistryArgs, FilterArgs {
  file: string;
  what: 'cells' | 'runs';
}

export const cellsExportCommand: CommandModule<object, ExportArgs> = {
  command: 'export <file>',
  describe: 'Write the registered cells (with latest figures and grade), or every run, as CSV',
  builder: (y) =>
    withFilterOptions(withRegistryOptions(y))
      .positional('file', { type: 'string', demandOption: true, describe: 'CSV file to write' })
      .option('what', {
        choices: ['cells', 'runs'] as const,
        default: 'cells' as const,
        describe: 'cells: one row per cell; runs: one row per run (standard uncertainties)',
      }) as Argv<ExportArgs>,
  handler: async (a) => {
    const path = registryPathOf(a);
    const text =
      a.what === 'runs'
        ? runsCsv(path)
        : cellsCsv(listGraded(path, listRequestOf(a), await loadGradeRules(a.grades)));
    await writeOutput(a.file, text);
    process.stdout.write(`wrote ${a.file}\n`);
  },
};
