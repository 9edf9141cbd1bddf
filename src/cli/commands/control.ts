import type { CommandModule } from 'yargs';
import { ErrorCodes, makeError } from '../../core/errors.js';
import { sendControl } from '../../live/control-client.js';
import type { StationControlRequest } from '../../live/live-types.js';
import { loadTokens } from '../../live/tokens.js';
import { liveSocketUrl } from '../../live/watch-view.js';

interface ControlArgs {
  channel: string;
  action: string;
  value: string | undefined;
  url: string;
  token: string | undefined;
  'viewer-token': string | undefined;
  cell: string | undefined;
}

const ACTIONS = ['start', 'stop', 'cutoff', 'mark'] as const;

export const controlCommand: CommandModule<object, ControlArgs> = {
  command: 'control <channel> <action> [value]',
  describe:
    'Start, stop, re-cut or mark one channel of a running station (or run) while the others go on',
  builder: (y) =>
    y
      .positional('channel', {
        type: 'string',
        demandOption: true,
        describe: 'The channel as <rig>/<n> (a one-channel run: its channel number)',
      })
      .positional('action', {
        type: 'string',
        demandOption: true,
        choices: ACTIONS,
        describe: 'start (the next run, after a cell swap), stop, cutoff <V per cell>, mark <note>',
      })
      .positional('value', { type: 'string', describe: 'The cutoff per cell, or the note' })
      .option('url', {
        type: 'string',
        default: 'http://127.0.0.1:8507/',
        describe: 'Address the daemon printed',
      })
      .option('cell', { type: 'string', describe: 'With start: what is written on the new cell' })
      .option('confirm', {
        type: 'boolean',
        default: false,
        describe: 'With cutoff: set it even at or above the present voltage (the run ends now)',
      })
      .option('token', {
        type: 'string',
        describe: "Control token (default: this machine's, from the cellvigil folder)",
      })
      .option('viewer-token', {
        type: 'string',
        describe: 'Viewer token, when the daemon listens beyond loopback',
      }),
  handler: async (args) => {
    const where = `control ${args.channel} ${args.action}`;
    const request = (hello: { run: { cells: number } | null }): StationControlRequest => {
      switch (args.action) {
        case 'start':
          return { type: 'start', ...(args.cell !== undefined ? { cell_id: args.cell } : {}) };
        case 'stop':
          return { type: 'stop' };
        case 'mark':
          if (!args.value)
            throw makeError(
              ErrorCodes.USAGE,
              'mark needs a note',
              where,
              'Add the note: mark "clip reseated".',
            );
          return { type: 'mark', note: args.value };
        default: {
          const perCell = Number(args.value);
          if (args.value === undefined || !Number.isFinite(perCell))
            throw makeError(
              ErrorCodes.USAGE,
              'cutoff needs volts per cell',
              where,
              'Give them, e.g. cutoff 3.1.',
            );
          if (!hello.run)
            throw makeError(
              ErrorCodes.USAGE,
              'the channel has no run to re-cut',
              where,
              'Start one first.',
            );
          // The feed takes the whole string's volts; the daemon refuses anything below the floor.
          return {
            type: 'set-cutoff',
            cutoff_V: perCell * hello.run.cells,
            ...(args.confirm ? { confirm: true } : {}),
          };
        }
      }
    };
    const reply = await sendControl({
      url: liveSocketUrl(args.url, args['viewer-token']),
      channel: args.channel,
      token: args.token ?? loadTokens().tokens.control,
      request,
    });
    if (reply.ok) {
      process.stdout.write(`${args.channel}: ${args.action} done\n`);
      return;
    }
    process.stderr.write(`cellvigil: ${args.channel}: ${args.action} refused: ${reply.error}\n`);
    process.exitCode = 2;
  },
};
