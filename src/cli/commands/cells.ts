import { readFile } from 'node:fs/promises';
import type { Argv, CommandModule } from 'yargs';
import { loadChemistries } from '../../chemistry/chemistry-file.js';
import { ErrorCodes, makeError } from '../../core/errors.js';
import { checkCell, parseCellCsv } from '../../registry/cell-csv.js';
import { rebuildRegistry } from '../../registry/rebuild.js';
import { Registry } from '../../registry/registry-db.js';
import { progressBar } from '../progress.js';
import { cellsExportCommand, cellsListCommand, cellsShowCommand } from './cells-view.js';
import { registryPathOf, withRegistryOptions, type RegistryArgs } from './registry-options.js';

interface AddArgs extends RegistryArgs {
  id: string;
  chemistry: string;
  rated: number;
  source: string;
  notes: string;
}

const chemistryIds = (): string[] => loadChemistries().map((c) => c.id);

const addCommand: CommandModule<object, AddArgs> = {
  command: 'add <id>',
  describe: 'Register one cell',
  builder: (y) =>
    withRegistryOptions(y)
      .positional('id', { type: 'string', demandOption: true, describe: 'The cell id' })
      .option('chemistry', { type: 'string', demandOption: true, describe: 'Chemistry id' })
      .option('rated', { type: 'number', demandOption: true, describe: 'Rated capacity, Ah' })
      .option('source', { type: 'string', default: '', describe: 'Where the cell came from' })
      .option('notes', { type: 'string', default: '', describe: 'Free text' }) as Argv<AddArgs>,
  handler: (a) => {
    const cell = {
      cell_id: a.id,
      chemistry: a.chemistry,
      rated_Ah: a.rated,
      source: a.source,
      notes: a.notes,
      registered_at: new Date().toISOString(),
    };
    const problem = checkCell(cell, chemistryIds());
    if (problem !== null)
      throw makeError(
        ErrorCodes.USAGE,
        problem.problem,
        `--${problem.key === 'rated_Ah' ? 'rated' : problem.key}`,
        'Correct the value and try again.',
      );
    const registry = Registry.open(registryPathOf(a));
    try {
      registry.addCells([cell], 'cells add');
    } finally {
      registry.close();
    }
    process.stdout.write(`registered ${a.id} in ${registry.path}\n`);
  },
};

interface ImportArgs extends RegistryArgs {
  file: string;
}

const importCommand: CommandModule<object, ImportArgs> = {
  command: 'import <file>',
  describe:
    'Register the cells of a CSV file (cell_id, chemistry, rated_Ah or rated_mAh, source, notes): all or none',
  builder: (y) =>
    withRegistryOptions(y).positional('file', {
      type: 'string',
      demandOption: true,
      describe: 'CSV file with a header row',
    }) as Argv<ImportArgs>,
  handler: async (a) => {
    let text: string;
    try {
      text = await readFile(a.file, 'utf8');
    } catch (e) {
      throw makeError(
        ErrorCodes.REGISTRY_CSV,
        `cannot read the file: ${(e as Error).message}`,
        a.file,
        'Give the path of a CSV file.',
      );
    }
    const cells = parseCellCsv(text, a.file, chemistryIds(), new Date().toISOString());
    const registry = Registry.open(registryPathOf(a));
    try {
      registry.addCells(cells, a.file);
    } finally {
      registry.close();
    }
    process.stdout.write(`registered ${cells.length} cell(s) from ${a.file} in ${registry.path}\n`);
  },
};

interface RebuildArgs extends RegistryArgs {
  folders: string[] | undefined;
}

const rebuildCommand: CommandModule<object, RebuildArgs> = {
  command: 'rebuild [folders..]',
  describe: 'Refile every run from folders of run folders (default --runs); registered cells stay',
  builder: (y) =>
    withRegistryOptions(y).positional('folders', {
      type: 'string',
      array: true,
      describe: 'Folders holding run folders',
    }) as Argv<RebuildArgs>,
  handler: async (a) => {
    const bar = progressBar(process.stderr);
    const folders = a.folders !== undefined && a.folders.length > 0 ? a.folders : [a.runs];
    const path = registryPathOf(a);
    let report;
    try {
      report = await rebuildRegistry(path, folders, {
        onProgress: (done, total) => bar.update('reading run folders', done, total),
      });
    } finally {
      bar.end();
    }
    const out: string[] = [
      `${report.folders} run folder(s) read; ${report.filed} run(s) filed in ${path}`,
    ];
    for (const d of report.damaged) out.push(`damaged, not filed: ${d.folder}: ${d.message}`);
    for (const s of report.skipped) out.push(`not filed: ${s.folder}: ${s.reason}`);
    for (const u of report.unfinished) out.push(`unfinished (no result.json), not filed: ${u}`);
    for (const d of report.duplicates) out.push(`the same run as another folder, filed once: ${d}`);
    if (report.unregistered.length > 0)
      out.push(
        `runs of unregistered cells (register them to see them in lists): ${report.unregistered.join(', ')}`,
      );
    process.stdout.write(`${out.join('\n')}\n`);
  },
};

export const cellsCommand: CommandModule = {
  command: 'cells',
  describe: 'The cell registry: register cells, list, show a history, export, rebuild',
  builder: (y) =>
    y
      .command(addCommand as never)
      .command(importCommand as never)
      .command(cellsListCommand as never)
      .command(cellsShowCommand as never)
      .command(cellsExportCommand as never)
      .command(rebuildCommand as never)
      .demandCommand(1, 'Name an action: add, import, list, show, export or rebuild.'),
  handler: () => undefined,
};
