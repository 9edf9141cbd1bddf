import { createInterface } from 'node:readline/promises';
import type { CommandModule } from 'yargs';
import { runCalibrate, type CalibrateIo } from '../../calibration/calibrate-run.js';
import type { Prompter } from '../../calibration/interactive.js';
import { ErrorCodes, makeError } from '../../core/errors.js';

interface CalibrateArgs {
  port: string | undefined;
  sim: string | undefined;
  speed: number;
  baud: number | undefined;
  rig: string | undefined;
  out: string;
  reference: string | undefined;
  seconds: number;
  settle: number;
  points: string | undefined;
  'from-points': string | undefined;
  chemistry: string | undefined;
  'chemistries-file': string | undefined;
  cells: number | undefined;
  channel: number;
}

export const calibrateCommand: CommandModule<object, CalibrateArgs> = {
  command: 'calibrate',
  describe: 'Capture reference points against a meter and write a calibration file',
  builder: (y) =>
    y
      .option('port', { type: 'string', describe: 'Serial device of the rig, e.g. /dev/ttyUSB0' })
      .option('sim', {
        type: 'string',
        describe:
          'Use the simulated rig with this scenario (config/sim-scenarios.yaml; default demo)',
        coerce: (v: unknown) => (v === '' || v === true ? 'demo' : String(v)),
      })
      .option('speed', {
        type: 'number',
        default: 1,
        describe: 'Simulated rig only: virtual-clock speed, 1 = real time',
      })
      .option('baud', {
        type: 'number',
        describe: 'Serial speed (default: frame.baud of the rig profile)',
      })
      .option('rig', {
        type: 'string',
        describe: 'Rig profile',
        defaultDescription: 'config/rigs/bench-20mohm.yaml',
      })
      .option('out', {
        type: 'string',
        demandOption: true,
        describe: 'Calibration file to write (JSON)',
      })
      .option('reference', {
        type: 'string',
        describe: 'The reference instrument: make, model, range, its calibration date',
      })
      .option('seconds', { type: 'number', default: 5, describe: 'Averaging window per point, s' })
      .option('settle', {
        type: 'number',
        default: 1,
        describe: 'Wait after setting a condition before averaging, s',
      })
      .option('points', {
        type: 'string',
        describe: 'YAML/JSON file of points to capture with their reference readings (no prompts)',
      })
      .option('from-points', {
        type: 'string',
        describe: 'Fit points captured before (raw means in the file); no rig needed',
      })
      .option('chemistry', {
        type: 'string',
        describe: 'Chemistry of the cell on the rig (needed for loaded points: safety limits)',
      })
      .option('chemistries-file', { type: 'string', describe: 'Another chemistry profile file' })
      .option('cells', {
        type: 'number',
        describe: "Cells in series (default 1, or the scenario's)",
      })
      .option('channel', { type: 'number', default: 0, describe: 'Rig channel' })
      .conflicts('port', 'sim')
      .example(
        '$0 calibrate --sim demo --speed 20 --points points.yaml --out cal.json',
        'scripted, on the simulated rig',
      )
      .example(
        '$0 calibrate --port /dev/ttyUSB0 --chemistry li-ion --out cal.json',
        'interactive, at a terminal',
      ),
  handler: async (args) => {
    const controller = new AbortController();
    const interrupt = (): void => {
      process.stdout.write('\ninterrupted: switching the load off; nothing will be written.\n');
      controller.abort(
        makeError(
          ErrorCodes.CALIBRATION_CAPTURE,
          'calibration interrupted',
          'SIGINT',
          'Nothing was written; the load was switched off. Run calibrate again to take the points.',
        ),
      );
    };
    const wantDialogue =
      args.points === undefined &&
      args['from-points'] === undefined &&
      process.stdin.isTTY === true;
    const rl = wantDialogue
      ? createInterface({ input: process.stdin, output: process.stdout })
      : null;
    rl?.on('SIGINT', interrupt);
    process.on('SIGINT', interrupt);
    const print = (line: string): void => {
      process.stdout.write(`${line}\n`);
    };
    const prompter: Prompter | null = rl
      ? {
          print,
          ask: async (question) => {
            try {
              return await rl.question(question, { signal: controller.signal });
            } catch (e) {
              throw controller.signal.aborted ? (controller.signal.reason as Error) : e;
            }
          },
        }
      : null;
    const io: CalibrateIo = { print, signal: controller.signal, ...(prompter ? { prompter } : {}) };
    try {
      await runCalibrate(
        {
          ...(args.port !== undefined ? { port: args.port } : {}),
          ...(args.sim !== undefined ? { sim: args.sim } : {}),
          speed: args.speed,
          ...(args.baud !== undefined ? { baud: args.baud } : {}),
          ...(args.rig !== undefined ? { rig: args.rig } : {}),
          out: args.out,
          ...(args.reference !== undefined ? { reference: args.reference } : {}),
          seconds: args.seconds,
          settleSeconds: args.settle,
          ...(args.points !== undefined ? { points: args.points } : {}),
          ...(args['from-points'] !== undefined ? { fromPoints: args['from-points'] } : {}),
          ...(args.chemistry !== undefined ? { chemistry: args.chemistry } : {}),
          ...(args['chemistries-file'] !== undefined
            ? { chemistriesFile: args['chemistries-file'] }
            : {}),
          ...(args.cells !== undefined ? { cells: args.cells } : {}),
          channel: args.channel,
        },
        io,
      );
    } finally {
      process.off('SIGINT', interrupt);
      rl?.close();
    }
  },
};
