import type { CommandModule } from 'yargs';
import { runAssess } from '../../assess/run-assess.js';

interface AssessArgs {
  rig: string;
  current: number | undefined;
  hours: number | undefined;
  calibration: string | undefined;
  'reference-accuracy': string | undefined;
  'claim-resolution': number | undefined;
  'rig-clock-tolerance': number | undefined;
  temperatures: number[] | undefined;
  json: boolean;
  chemistry: string | undefined;
  cells: number | undefined;
  'chemistries-file': string | undefined;
}

export const assessCommand: CommandModule<object, AssessArgs> = {
  command: 'assess <rig>',
  describe: "Resolution, full scale and error budget of a rig profile's analog chain",
  builder: (y) =>
    y
      .positional('rig', {
        type: 'string',
        demandOption: true,
        describe: 'Rig profile (YAML), e.g. config/rigs/bench-20mohm.yaml',
      })
      .option('current', {
        type: 'number',
        describe: 'Test current, A (with --hours: a capacity budget)',
      })
      .option('hours', { type: 'number', describe: 'Test duration, h' })
      .option('calibration', {
        type: 'string',
        describe: 'Calibration file of this rig: use its fit in the budget',
      })
      .option('reference-accuracy', {
        type: 'string',
        describe: 'Accuracy of the meter a calibration will use, e.g. "0.5%+0.003" or "u=0.002"',
      })
      .option('claim-resolution', {
        type: 'number',
        describe: 'Warn if the current channel cannot resolve this many amps',
      })
      .option('rig-clock-tolerance', {
        type: 'number',
        describe: "Tolerance of the rig's own oscillator, %: what timing by it would cost",
      })
      .option('temperatures', {
        type: 'array',
        number: true,
        describe: 'Where to give the thermistor step, °C (default 0 25 45 60)',
      })
      .option('chemistry', {
        type: 'string',
        describe:
          'Chemistry of the battery to test: warn when a full one is beyond the voltage range',
      })
      .option('cells', { type: 'number', describe: 'Cells in series of that battery (default 1)' })
      .option('chemistries-file', { type: 'string', describe: 'Another chemistry profile file' })
      .option('json', { type: 'boolean', default: false, describe: 'Print the report as JSON' })
      .example(
        '$0 assess config/rigs/inverting-10bit.yaml --claim-resolution 0.001',
        'can this board resolve 1 mA?',
      )
      .example(
        '$0 assess config/rigs/bench-20mohm.yaml --current 0.5 --hours 5 --reference-accuracy "0.5%+0.003"',
        'the budget of a 0.2 It test',
      ),
  handler: async (args) => {
    const { report, text } = await runAssess({
      rig: args.rig,
      ...(args.current !== undefined ? { currentA: args.current } : {}),
      ...(args.hours !== undefined ? { hours: args.hours } : {}),
      ...(args.calibration !== undefined ? { calibration: args.calibration } : {}),
      ...(args['reference-accuracy'] !== undefined
        ? { referenceAccuracy: args['reference-accuracy'] }
        : {}),
      ...(args['claim-resolution'] !== undefined
        ? { claimResolutionA: args['claim-resolution'] }
        : {}),
      ...(args['rig-clock-tolerance'] !== undefined
        ? { rigClockTolerancePct: args['rig-clock-tolerance'] }
        : {}),
      ...(args.temperatures !== undefined ? { temperatures: args.temperatures } : {}),
      ...(args.chemistry !== undefined ? { chemistry: args.chemistry } : {}),
      ...(args.cells !== undefined ? { cells: args.cells } : {}),
      ...(args['chemistries-file'] !== undefined
        ? { chemistriesFile: args['chemistries-file'] }
        : {}),
    });
    process.stdout.write(args.json ? `${JSON.stringify(report, null, 2)}\n` : `${text}\n`);
  },
};
