import type { CommandModule } from 'yargs';
import {
  checkPublishArgs,
  publishOptions,
  resolvePublishing,
  type PublishArgs,
} from '../../fleet/broker-args.js';
import { registryOption } from './registry-options.js';
import { DEFAULT_ROTATE_BYTES } from '../../run/run-request.js';
import { channelRunner } from '../station-runner.js';
import { startStation, type StationRequest } from '../../station/station-daemon.js';

interface StationArgs extends PublishArgs {
  file: string;
  runs: string;
  registry: string | undefined;
  listen: string | undefined;
  live: boolean;
  speed: number;
  once: boolean;
  new: boolean;
  'link-timeout': number;
  'rotate-mb': number;
  'chemistries-file': string | undefined;
}

export const stationCommand: CommandModule<object, StationArgs> = {
  command: 'station <file>',
  describe: 'Run a station: every channel of every rig in the station file, each its own run',
  builder: (y) =>
    y
      .positional('file', {
        type: 'string',
        demandOption: true,
        describe: 'Station file (docs/station.md; config/station-demo.yaml is an example)',
      })
      .option('runs', {
        type: 'string',
        default: 'runs',
        describe: 'Where run folders go, unless the station file says',
      })
      .option('listen', {
        type: 'string',
        describe: "host:port of the live feed (default: the station file's, else 127.0.0.1:8507)",
      })
      .option('live', {
        type: 'boolean',
        default: true,
        describe: 'Serve the live feed (--no-live: none)',
      })
      .option('speed', {
        type: 'number',
        default: 1,
        describe:
          'Virtual-clock speed of simulated rigs (a station of real rigs runs in real time)',
      })
      .option('once', {
        type: 'boolean',
        default: false,
        describe: 'Exit when every channel has ended',
      })
      .option('new', {
        type: 'boolean',
        default: false,
        describe: 'Start every channel afresh instead of resuming unfinished runs',
      })
      .option('link-timeout', {
        type: 'number',
        default: 60,
        describe: "Seconds a rig's port may stay away before its channels end as link_lost",
      })
      .option('rotate-mb', {
        type: 'number',
        default: DEFAULT_ROTATE_BYTES / 1048576,
        describe: 'Start a new sample file after this many MiB',
      })
      .option('chemistries-file', { type: 'string', describe: 'Chemistry profiles to use' })
      .option('registry', registryOption)
      .options(publishOptions())
      .check((a) => checkPublishArgs(a)),
  handler: async (args) => {
    const print = (line: string): boolean => process.stdout.write(`${line}\n`);
    const req: StationRequest = {
      ...resolvePublishing(args),
      file: args.file,
      runs: args.runs,
      registry: args.registry ?? null,
      listen: args.live ? args.listen : null,
      speed: args.speed,
      once: args.once,
      fresh: args.new,
      linkTimeoutS: args['link-timeout'],
      ...(args['chemistries-file'] !== undefined
        ? { chemistriesFile: args['chemistries-file'] }
        : {}),
    };
    const runner = channelRunner({
      print,
      rotateBytes: Math.max(4096, Math.round(args['rotate-mb'] * 1048576)),
      ...(req.chemistriesFile !== undefined ? { chemistriesFile: req.chemistriesFile } : {}),
    });
    const station = await startStation(req, { print, signals: true }, runner);
    const code = await station.done;
    // Exit now: every result is written; a late Ctrl-C must not turn a clean end into a signal death.
    process.exit(code);
  },
};
