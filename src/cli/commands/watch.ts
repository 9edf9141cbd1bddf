import type { CommandModule } from 'yargs';
import { watchLive } from '../../live/watch-client.js';
import {
  applyMessage,
  emptyView,
  exitCodeForResult,
  liveSocketUrl,
  statusBlock,
  statusLine,
} from '../../live/watch-view.js';
import {
  applyStationMessage,
  stationEventLine,
  stationTable,
  type StationView,
} from '../../live/watch-station.js';

interface WatchArgs {
  url: string;
  token: string | undefined;
  interval: number;
}

export const watchCommand: CommandModule<object, WatchArgs> = {
  command: 'watch <url>',
  describe: "Follow a live run in the terminal; exits with the run's exit code when it ends",
  builder: (y) =>
    y
      .positional('url', {
        type: 'string',
        demandOption: true,
        describe: 'Address the daemon printed, e.g. http://192.168.1.20:8507/',
      })
      .option('token', {
        type: 'string',
        describe: 'Viewer token (needed when the daemon listens beyond loopback)',
      })
      .option('interval', {
        type: 'number',
        default: 1,
        describe: 'Seconds between sample lines when the output is not a terminal',
      })
      .check((a) => {
        if (!(a.interval >= 0)) throw new Error('--interval must be zero or more seconds.');
        return true;
      }),
  handler: async (args) => {
    // A station answers with its overview; a one-channel daemon ignores the parameter.
    const socket = new URL(liveSocketUrl(args.url, args.token));
    socket.searchParams.set('view', 'station');
    const url = socket.toString();
    let station: StationView | null = null;
    const out = process.stdout;
    const tty = out.isTTY === true;
    const view = emptyView();
    let drawn = 0;
    let lastLine = -Infinity;
    let redrawPending = false;

    const draw = (): void => {
      redrawPending = false;
      const lines = station ? stationTable(station) : statusBlock(view);
      // Move to the start of the previous block and clear it, then write the new one.
      out.write(
        `${drawn > 0 ? `\x1b[${drawn}F\x1b[J` : ''}${lines.map((l) => l.slice(0, Math.max(20, (out.columns || 100) - 1))).join('\n')}\n`,
      );
      drawn = lines.length;
    };
    const update = (important: boolean): void => {
      if (tty) {
        if (important) draw();
        else if (!redrawPending) {
          redrawPending = true;
          setTimeout(draw, 250);
        }
        return;
      }
      const now = performance.now();
      if (!important && now - lastLine < args.interval * 1000) return;
      lastLine = now;
      out.write(station ? `${stationTable(station).join('\n')}\n` : `${statusLine(view)}\n`);
    };

    let exitCode: number | null = null;
    const client = watchLive({
      url,
      onLink: (text) => {
        view.link = text;
        if (station) station.link = text;
        if (tty) update(true);
        else if (text !== 'live' && text !== 'connecting') process.stderr.write(`watch: ${text}\n`);
      },
      onMessage: (m) => {
        if (m.type === 'station') station ??= { channels: [], link: view.link };
        if (station) {
          if (!applyStationMessage(station, m)) return;
          if (tty) return update(m.type !== 'station');
          const event = stationEventLine(m);
          if (event !== null) out.write(`${event}\n`);
          else update(false);
          return;
        }
        const important = applyMessage(view, m);
        if (m.type === 'sample' || important) update(important);
        if (view.result && exitCode === null) {
          exitCode = exitCodeForResult(view.result);
          client.stop();
        }
      },
    });
    const onSignal = (): void => client.stop();
    process.once('SIGINT', onSignal);
    try {
      await client.done;
    } finally {
      process.off('SIGINT', onSignal);
    }
    if (exitCode !== null) process.exitCode = exitCode;
  },
};
