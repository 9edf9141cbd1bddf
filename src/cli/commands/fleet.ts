import type { CommandModule } from 'yargs';
import { brokerOptions, brokerRequest, type BrokerArgs } from '../../fleet/broker-args.js';
import { resolveBroker } from '../../fleet/broker-options.js';
import { registryFiler } from '../../fleet/fleet-filing.js';
import { startFleetView } from '../../fleet/fleet-view.js';
import { loadTokens } from '../../live/tokens.js';
import { hostname } from 'node:os';

interface FleetArgs extends BrokerArgs {
  listen: string;
  registry: string | undefined;
}

export const DEFAULT_FLEET_LISTEN = '127.0.0.1:8508';

export const fleetCommand: CommandModule<object, FleetArgs> = {
  command: 'fleet',
  describe: 'Follow every station on an MQTT broker: one page of all stations and channels',
  builder: (y) =>
    y
      .options(brokerOptions('follow'))
      .demandOption('broker')
      .option('listen', {
        type: 'string',
        default: DEFAULT_FLEET_LISTEN,
        describe: 'host:port of the fleet page',
      })
      .option('registry', {
        type: 'string',
        describe:
          'Cell registry to file every result seen on the broker in (one for the whole lab)',
      }),
  handler: async (args) => {
    const broker = resolveBroker(
      brokerRequest({ ...args, broker: args.broker! }),
      `cellvigil-fleet-${hostname()}-${process.pid}`,
    );
    const tokens = loadTokens();
    const filer =
      args.registry !== undefined
        ? registryFiler(args.registry, (line) => process.stdout.write(`fleet: ${line}\n`))
        : null;
    const view = await startFleetView({
      ...(filer ? { fileResult: filer } : {}),
      broker,
      listen: args.listen,
      tokenStore: tokens.tokens,
      log: (name, detail) => {
        if (name === 'fleet_connected' || name === 'fleet_down')
          process.stderr.write(
            `fleet: ${name === 'fleet_connected' ? 'connected to' : 'lost'} ${String(detail['broker'])}${detail['why'] ? ` (${String(detail['why'])}); retrying` : ''}\n`,
          );
      },
    });
    process.stdout.write(`fleet: ${view.url}\n`);
    if (tokens.generated) {
      process.stdout.write(
        `Tokens were made and saved in ${tokens.path} (owner-only); shown this once:\n`,
      );
      process.stdout.write(
        `  viewer token (the fleet page from another machine): ${tokens.tokens.viewer}\n`,
      );
    }
    await new Promise<void>((resolve) => {
      process.once('SIGINT', () => resolve());
      process.once('SIGTERM', () => resolve());
    });
    await view.close();
    await filer?.idle();
    process.exit(0);
  },
};
