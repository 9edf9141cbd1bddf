import type { CommandModule } from 'yargs';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../../chemistry/chemistry-file.js';
import { formatChemistryTable } from '../../chemistry/format.js';

interface ChemistriesArgs {
  file: string;
  cautions: boolean;
  json: boolean;
}

export const chemistriesCommand: CommandModule<object, ChemistriesArgs> = {
  command: 'chemistries',
  describe: 'List the chemistry profiles with their limits and sources',
  builder: (y) =>
    y
      .option('file', {
        type: 'string',
        default: DEFAULT_CHEMISTRIES_PATH,
        defaultDescription: 'config/chemistries.yaml',
        describe: 'Chemistry profile file',
      })
      .option('cautions', {
        type: 'boolean',
        default: false,
        describe: "Also print each chemistry's cautions",
      })
      .option('json', { type: 'boolean', default: false, describe: 'Print the profiles as JSON' }),
  handler: (args) => {
    const profiles = loadChemistries(args.file);
    process.stdout.write(
      args.json
        ? `${JSON.stringify(profiles, null, 2)}\n`
        : `${formatChemistryTable(profiles, { cautions: args.cautions })}\n`,
    );
  },
};
