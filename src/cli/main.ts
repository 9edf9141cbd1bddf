#!/usr/bin/env node
import yargs from 'yargs';
import { hideBin } from 'yargs/helpers';
import { CellvigilError } from '../core/errors.js';
import { assessCommand } from './commands/assess.js';
import { calibrateCommand } from './commands/calibrate.js';
import { cellsCommand } from './commands/cells.js';
import { chemistriesCommand } from './commands/chemistries.js';
import { controlCommand } from './commands/control.js';
import { packCommand } from './commands/pack.js';
import { fleetCommand } from './commands/fleet.js';
import { reportCommand } from './commands/report.js';
import { runCommand } from './commands/run.js';
import { simCommand } from './commands/sim.js';
import { stationCommand } from './commands/station.js';
import { watchCommand } from './commands/watch.js';

/** One entry per command; each lives in ./commands/<name>.ts. */
const commands = [
  runCommand,
  stationCommand,
  chemistriesCommand,
  simCommand,
  watchCommand,
  controlCommand,
  reportCommand,
  calibrateCommand,
  assessCommand,
  cellsCommand,
  packCommand,
  fleetCommand,
];

async function main(): Promise<void> {
  let cli = yargs(hideBin(process.argv))
    .scriptName('cellvigil')
    .strict()
    .demandCommand(1, 'Name a command: cellvigil <command> --help shows its options.')
    .recommendCommands()
    .wrap(Math.min(100, process.stdout.columns || 100))
    .fail((msg, err) => {
      if (err instanceof CellvigilError) throw err;
      const what = (msg ?? err?.message ?? 'bad usage').replace(/\.?$/, '.');
      throw new CellvigilError(
        'CV_USAGE',
        `${what} Run cellvigil --help for the commands and options.`,
        2,
      );
    });
  for (const c of commands) cli = cli.command(c as never);
  await cli.parseAsync();
}

main().catch((e: unknown) => {
  if (e instanceof CellvigilError) {
    process.stderr.write(`cellvigil: ${e.code}: ${e.message}\n`);
    process.exitCode = e.exitCode;
  } else {
    process.stderr.write(`cellvigil: unexpected failure: ${(e as Error)?.stack ?? String(e)}\n`);
    process.exitCode = 1;
  }
});
