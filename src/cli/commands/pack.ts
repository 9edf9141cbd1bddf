import type { Argv, CommandModule } from 'yargs';
import { ErrorCodes, makeError } from '../../core/errors.js';
import { packCsv, packPage } from '../../pack/pack-page.js';
import { buildPack } from '../../registry/cell-queries.js';
import { packText } from '../../registry/cell-text.js';
import { loadGradeRules } from '../../registry/grade-rules.js';
import {
  filterText,
  listRequestOf,
  registryPathOf,
  withFilterOptions,
  withRegistryOptions,
  type FilterArgs,
  type RegistryArgs,
} from './registry-options.js';
import { writeOutput } from './write-output.js';

interface PackArgs extends RegistryArgs, FilterArgs {
  series: number;
  parallel: number;
  csv: string | undefined;
  page: string | undefined;
}

function count(n: number, option: string): void {
  if (!Number.isInteger(n) || n < 1 || n > 1000)
    throw makeError(
      ErrorCodes.USAGE,
      `${n} is not a whole number from 1 to 1000`,
      option,
      'Give the number of groups (series) or cells per group (parallel).',
    );
}

export const packCommand: CommandModule<object, PackArgs> = {
  command: 'pack',
  describe: 'Choose S×P graded cells and group them so the series groups match in capacity',
  builder: (y) =>
    withFilterOptions(withRegistryOptions(y))
      .option('series', {
        alias: 's',
        type: 'number',
        demandOption: true,
        describe: 'Groups in series (S)',
      })
      .option('parallel', {
        alias: 'p',
        type: 'number',
        demandOption: true,
        describe: 'Cells in parallel per group (P)',
      })
      .option('csv', { type: 'string', describe: 'Write the groups to this CSV file' })
      .option('page', {
        type: 'string',
        describe: 'Write the plan with a picture of the groups (HTML) here',
      }) as Argv<PackArgs>,
  handler: async (a) => {
    count(a.series, '--series');
    count(a.parallel, '--parallel');
    const rules = await loadGradeRules(a.grades);
    const request = listRequestOf(a);
    const plan = buildPack(
      registryPathOf(a),
      { ...request, series: a.series, parallel: a.parallel },
      rules,
    );
    process.stdout.write(packText(plan));
    if (a.csv !== undefined) {
      await writeOutput(a.csv, packCsv(plan));
      process.stdout.write(`wrote ${a.csv}\n`);
    }
    if (a.page !== undefined) {
      await writeOutput(a.page, packPage(plan, filterText(a), new Date().toISOString()));
      process.stdout.write(`wrote ${a.page}\n`);
    }
  },
};
