import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import type { CommandModule } from 'yargs';
import { loadRigProfile } from '../../chain/rig-profile.js';
import { HostClock } from '../../core/clock.js';
import { ErrorCodes, makeError } from '../../core/errors.js';
import { DEFAULT_RIG_PATH } from '../../chain/default-rig.js';
import { writeJsonAtomic } from '../../sinks/atomic-json.js';
import {
  buildSimRig,
  loadScenarios,
  pickScenario,
  type SimOverrides,
  DEFAULT_SCENARIOS_PATH,
} from '../../sim/scenarios.js';
import { attachSimRig, truthSnapshot } from '../../sim/sim-port.js';

interface SimArgs {
  scenario: string;
  port: string | undefined;
  pty: string | undefined;
  rig: string;
  'clock-error': number | undefined;
  burst: number | undefined;
  drop: number | undefined;
  garbage: number | undefined;
  seed: number | undefined;
  truth: string | undefined;
}

/** Makes a linked pseudo-terminal pair with socat: `<link>` for the host, `<link>.rig` for the simulator. */
async function ptyPair(link: string): Promise<ChildProcess> {
  const child = spawn('socat', [`pty,raw,echo=0,link=${link}`, `pty,raw,echo=0,link=${link}.rig`], {
    stdio: 'ignore',
  });
  const failed = new Promise<never>((_, reject) =>
    child.once('error', (e) =>
      reject(
        makeError(
          ErrorCodes.USAGE,
          `cannot start socat: ${e.message}`,
          '--pty',
          'Install socat (apt-get install socat) or make the pair yourself and use --port.',
        ),
      ),
    ),
  );
  const ready = (async () => {
    for (let i = 0; i < 100; i++) {
      if (existsSync(link) && existsSync(`${link}.rig`)) return;
      await new Promise((r) => setTimeout(r, 50));
    }
    throw makeError(
      ErrorCodes.USAGE,
      'socat did not create the pseudo-terminals within 5 s',
      `--pty ${link}`,
      'Check that the folder is writable.',
    );
  })();
  await Promise.race([ready, failed]);
  return child;
}

export const simCommand: CommandModule<object, SimArgs> = {
  command: 'sim [scenario]',
  describe: 'Run the simulated rig on a serial device or pseudo-terminal, in real time',
  builder: (y) =>
    y
      .positional('scenario', {
        type: 'string',
        default: 'demo',
        describe: 'Scenario in config/sim-scenarios.yaml',
      })
      .option('port', {
        type: 'string',
        describe: 'Serial device the simulator talks on (one end of a pty pair)',
      })
      .option('pty', {
        type: 'string',
        describe:
          'Make a pty pair with socat: the host side at this path, the simulator at <path>.rig',
      })
      .option('rig', {
        type: 'string',
        default: DEFAULT_RIG_PATH,
        defaultDescription: 'config/rigs/bench-20mohm.yaml',
        describe: 'Rig profile the simulated board is built to',
      })
      .option('clock-error', {
        type: 'number',
        describe: 'Rig clock rate error, e.g. 0.2 for 20 % fast',
      })
      .option('burst', { type: 'number', describe: 'Frames per write (USB-style batching)' })
      .option('drop', { type: 'number', describe: 'Probability of dropping a frame' })
      .option('garbage', {
        type: 'number',
        describe: 'Probability of a garbage line after a frame',
      })
      .option('seed', { type: 'number', describe: 'Seed of noise and faults' })
      .option('truth', {
        type: 'string',
        describe: "Keep the simulator's true totals and load switches in this JSON file",
      })
      .check((a) => {
        if ((a.port === undefined) === (a.pty === undefined))
          throw new Error('Give exactly one of --port <device> or --pty <path>.');
        return true;
      }),
  handler: async (args) => {
    const scenario = pickScenario(loadScenarios(DEFAULT_SCENARIOS_PATH), args.scenario);
    const profile = await loadRigProfile(args.rig);
    const overrides: SimOverrides = {
      ...(args['clock-error'] !== undefined ? { clockError: args['clock-error'] } : {}),
      ...(args.burst !== undefined ? { burstFrames: args.burst } : {}),
      ...(args.drop !== undefined ? { dropProbability: args.drop } : {}),
      ...(args.garbage !== undefined ? { garbageProbability: args.garbage } : {}),
      ...(args.seed !== undefined ? { seed: args.seed } : {}),
    };
    const clock = new HostClock();
    const rig = buildSimRig(scenario, clock, profile, overrides);
    const socat = args.pty !== undefined ? await ptyPair(args.pty) : null;
    const device = args.port ?? `${args.pty!}.rig`;
    const link = await attachSimRig(rig, device, profile.frame.baud);
    process.stdout.write(
      `simulated rig "${scenario.name}" on ${device}${args.pty !== undefined ? `; connect cellvigil to ${args.pty}` : ''}\n`,
    );
    let writing = false;
    const saveTruth = async (): Promise<void> => {
      if (args.truth === undefined || writing) return;
      writing = true;
      await writeJsonAtomic(args.truth, truthSnapshot(rig, clock)).finally(() => (writing = false));
    };
    const timer = setInterval(() => void saveTruth(), 250);
    await new Promise<void>((resolve) => {
      process.once('SIGINT', resolve);
      process.once('SIGTERM', resolve);
    });
    clearInterval(timer);
    await link.close();
    while (writing) await new Promise((r) => setTimeout(r, 10));
    await saveTruth();
    socat?.kill();
  },
};
