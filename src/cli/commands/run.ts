import type { Argv, CommandModule } from 'yargs';
import { brokerOptions, brokerRequest, type BrokerArgs } from '../../fleet/broker-args.js';
import { checkStationId, defaultStationId, resolveBroker } from '../../fleet/broker-options.js';
import type { FleetRunRequest } from '../../fleet/fleet-link.js';
import { defaultRegistryPath } from '../../registry/registry-path.js';
import { startRun } from '../../run/daemon.js';
import { registryOption } from './registry-options.js';
import { DEFAULT_LISTEN, DEFAULT_ROTATE_BYTES, type RunRequest } from '../../run/run-request.js';

interface RunArgs extends BrokerArgs {
  station: string | undefined;
  'broker-sample-rate': number;
  port: string | undefined;
  sim: string | undefined;
  speed: number;
  rig: string | undefined;
  calibration: string | undefined;
  chemistry: string | undefined;
  'chemistries-file': string | undefined;
  cells: number | undefined;
  cutoff: number | undefined;
  label: string | undefined;
  cell: string | undefined;
  runs: string;
  registry: string | undefined;
  listen: string;
  live: boolean;
  once: boolean;
  baud: number | undefined;
  channel: number;
  'rotate-mb': number;
  resume: string | undefined;
  schedule: string | undefined;
  program: string | undefined;
  rated: number | undefined;
  new: boolean;
  'link-timeout': number;
}

/** Where the frames come from, and the cell on the rig. */
function rigAndCellOptions<T>(y: Argv<T>) {
  return y
    .option('port', {
      type: 'string',
      describe: 'Serial device of the rig (or a pseudo-terminal)',
      conflicts: 'sim',
    })
    .option('sim', {
      type: 'string',
      describe: 'Use the built-in simulated rig with this scenario (config/sim-scenarios.yaml)',
      coerce: (v: unknown) => (v === '' || v === true ? 'demo' : String(v)),
    })
    .option('speed', {
      type: 'number',
      default: 1,
      describe: 'Clock speed of the simulated rig (1 = real time)',
    })
    .option('rig', {
      type: 'string',
      describe: 'Rig profile (YAML); default config/rigs/bench-20mohm.yaml',
    })
    .option('calibration', { type: 'string', describe: 'Calibration file of this rig (JSON)' })
    .option('chemistry', {
      type: 'string',
      describe: 'Chemistry profile id (see `cellvigil chemistries`); required with --port',
    })
    .option('chemistries-file', { type: 'string', describe: 'Another chemistry profile file' })
    .option('cells', {
      type: 'number',
      describe: "Cells in series (default 1, or the scenario's)",
    })
    .option('cutoff', {
      type: 'number',
      describe: "End-of-discharge voltage per cell (never below the chemistry's floor)",
    })
    .option('cell', {
      type: 'string',
      describe: 'Cell id: what is written on the cell (kept in the manifest and the result)',
    });
}

/** The run folder, the live feed, the link and the schedule. */
function runOptions<T>(y: Argv<T>) {
  return y
    .option('label', { type: 'string', describe: "Label in the run folder's name" })
    .option('runs', {
      type: 'string',
      default: 'runs',
      describe: 'Folder that holds the run folders',
    })
    .option('registry', registryOption)
    .option('listen', {
      type: 'string',
      default: DEFAULT_LISTEN,
      describe: 'host:port of the live feed',
    })
    .option('live', {
      type: 'boolean',
      default: true,
      describe: 'Serve the live feed (--no-live to switch it off)',
    })
    .option('once', {
      type: 'boolean',
      default: false,
      describe: 'Exit when the run ends (for scripts)',
    })
    .option('baud', {
      type: 'number',
      describe: "Serial baud rate (default: the rig profile's frame.baud)",
    })
    .option('channel', { type: 'number', default: 0, describe: 'Rig channel the cell is on' })
    .option('schedule', {
      type: 'string',
      describe:
        'Discharge schedule: a YAML file, or e.g. "on 15 s every 1 min, 8 h per day, to 1.0 V"',
    })
    .option('program', {
      type: 'string',
      describe:
        'Program file: charge, rest and discharge steps, repeated (docs/programs.md); a protocol 1.1 rig',
    })
    .option('rated', {
      type: 'number',
      describe: "Rated capacity for the program's C-rates, Ah (replaces the file's rated_Ah)",
    })
    .option('resume', {
      type: 'string',
      describe: 'Continue an interrupted run from its folder (same rig, chemistry and limits)',
    })
    .option('new', {
      type: 'boolean',
      default: false,
      describe: 'Start a new run even if an unfinished run on this port could be resumed',
    })
    .option('link-timeout', {
      type: 'number',
      default: 60,
      describe: "Seconds the rig's port may stay unplugged before the run ends as link_lost",
    })
    .option('rotate-mb', {
      type: 'number',
      default: DEFAULT_ROTATE_BYTES / 1048576,
      describe: 'Start a new sample file after this many MiB',
    });
}

/** Publishing the run to an MQTT broker (docs/fleet.md). */
function brokerRunOptions<T>(y: Argv<T>) {
  return y
    .options(brokerOptions('publish the run to (docs/fleet.md)'))
    .option('station', {
      type: 'string',
      describe: "This station's id on the broker (default: the host name)",
    })
    .option('broker-sample-rate', {
      type: 'number',
      default: 2,
      describe: 'Samples per second sent to the broker (the newest of each interval)',
    })
    .check((a) => {
      if (a.broker !== undefined && a.live === false)
        throw new Error('--broker publishes what the live feed shows: drop --no-live.');
      if (!(a['broker-sample-rate'] > 0 && a['broker-sample-rate'] <= 20))
        throw new Error('--broker-sample-rate must be above 0 and at most 20.');
      return true;
    });
}

export const runCommand: CommandModule<object, RunArgs> = {
  command: 'run',
  describe: 'Discharge a cell: acquire, integrate, enforce the limits, log',
  builder: (y) => brokerRunOptions(runOptions(rigAndCellOptions(y))),
  handler: async (args) => {
    // Resolved here, so a wrong broker option or credentials file stops before any load is on.
    const station = args.station !== undefined ? checkStationId(args.station) : defaultStationId();
    const fleet: FleetRunRequest = args.broker
      ? {
          fleet: {
            broker: resolveBroker(
              brokerRequest({ ...args, broker: args.broker }),
              `cellvigil-${station}`,
            ),
            station,
            sampleHz: args['broker-sample-rate'],
          },
        }
      : {};
    const req: RunRequest & FleetRunRequest = {
      ...fleet,
      speed: args.speed,
      runs: args.runs,
      registry: args.registry ?? defaultRegistryPath(args.runs),
      listen: args.live ? args.listen : null,
      once: args.once,
      channel: args.channel,
      rotateBytes: Math.max(4096, Math.round(args['rotate-mb'] * 1048576)),
      linkTimeoutS: args['link-timeout'],
      fresh: args.new,
      ...(args.resume !== undefined ? { resume: args.resume } : {}),
      ...(args.schedule !== undefined ? { schedule: args.schedule } : {}),
      ...(args.program !== undefined ? { program: args.program } : {}),
      ...(args.rated !== undefined ? { rated: args.rated } : {}),
      ...(args.port !== undefined ? { port: args.port } : {}),
      ...(args.sim !== undefined ? { sim: args.sim } : {}),
      ...(args.rig !== undefined ? { rig: args.rig } : {}),
      ...(args.calibration !== undefined ? { calibration: args.calibration } : {}),
      ...(args.chemistry !== undefined ? { chemistry: args.chemistry } : {}),
      ...(args['chemistries-file'] !== undefined
        ? { chemistriesFile: args['chemistries-file'] }
        : {}),
      ...(args.cells !== undefined ? { cells: args.cells } : {}),
      ...(args.cutoff !== undefined ? { cutoff: args.cutoff } : {}),
      ...(args.label !== undefined ? { label: args.label } : {}),
      ...(args.cell !== undefined ? { cellId: args.cell } : {}),
      ...(args.baud !== undefined ? { baud: args.baud } : {}),
    };
    // Ctrl-C ends the run and the program: the live page is kept up only for a run that ended
    // by itself (or from the page), to show its result.
    let signalled = false;
    const noteSignal = (): void => {
      signalled = true;
    };
    process.on('SIGINT', noteSignal);
    process.on('SIGTERM', noteSignal);
    const run = await startRun(req, { out: process.stdout, err: process.stderr, signals: true });
    const outcome = await run.done;
    if (run.liveUrl !== null) {
      if (args.once || signalled) {
        // A moment for viewers to receive the result before the feed goes away.
        await new Promise((r) => setTimeout(r, 500));
      } else {
        process.stdout.write(
          `The run has ended; ${run.liveUrl} keeps showing its result. Ctrl-C to exit.\n`,
        );
        await new Promise<void>((resolve) => {
          process.once('SIGINT', () => resolve());
          process.once('SIGTERM', () => resolve());
        });
      }
      await run.closeLive();
    }
    // Exit now: everything is written, and a late Ctrl-C during the process's own teardown
    // would otherwise turn a clean end into death by signal.
    process.exit(outcome.exitCode);
  },
};
