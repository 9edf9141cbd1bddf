/**
 * What a station does around its channels' runs besides running them: every channel's live hub
 * linked to the fleet broker on one connection, and each finished run filed into the cell
 * registry. Neither can touch a run (see src/fleet and src/registry/file-run.ts).
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { startFleetLink, type FleetLink, type FleetRunOptions } from '../fleet/fleet-link.js';
import { MAX_CHANNEL } from '../fleet/topics.js';
import type { StationControlRequest } from '../live/live-types.js';
import type { StationFeed } from '../live/station-feed.js';
import { loadTokens } from '../live/tokens.js';
import { fileAtRunEnd } from '../registry/file-run.js';
import type { ChannelRunner } from './channel-runner.js';
import { channelKey, type StationPlan } from './station-types.js';

/**
 * The fleet's channel number of each station channel: a station of one rig keeps the rig's own
 * channel numbers; a station of several rigs numbers its channels from 0 in the file's order
 * (rigs in order, channels in order), since a fleet channel is a number, not `<rig>/<n>`.
 */
export function fleetChannels(plan: StationPlan): Map<string, number> {
  const keys = plan.rigs.flatMap((r) =>
    r.channels.map((c) => ({ key: channelKey(r.name, c.channel), ch: c.channel })),
  );
  const numbered = new Map(keys.map((k, i) => [k.key, plan.rigs.length === 1 ? k.ch : i]));
  if ([...numbered.values()].some((n) => n > MAX_CHANNEL))
    throw makeError(
      ErrorCodes.BROKER_CONFIG,
      `the station has ${keys.length} channels on ${plan.rigs.length} rigs; the fleet's topics carry channels 0 to ${MAX_CHANNEL}`,
      plan.file,
      'Publish at most 16 channels per station: split the rigs over two station files, each with its own --station.',
    );
  return numbered;
}

/** Links every channel's hub to the broker, under the numbers of `fleetChannels`. */
export function linkStationFeed(
  fleet: FleetRunOptions,
  feed: StationFeed,
  numbers: Map<string, number>,
  print: (line: string) => void,
): FleetLink {
  // Through the station's feed: a start reaches the station, the rest the channel's hub.
  const channels = feed.keys().map((key) => ({
    channel: numbers.get(key)!,
    hub: feed.hub(key)!,
    control: (c: StationControlRequest, by: string) => feed.control(key, c, by),
  }));
  const map = feed
    .keys()
    .map((k) => `${k} → ch ${numbers.get(k)}`)
    .join(', ');
  print(`fleet: publishing as station ${fleet.station} to ${fleet.broker.url} (${map})`);
  return startFleetLink({
    ...fleet,
    channels,
    controlToken: loadTokens().tokens.control,
    log: (name, detail) => {
      if (name === 'fleet_connected') print(`fleet: connected to ${fleet.broker.url}`);
      else if (name === 'fleet_down') print(`fleet: ${String(detail['why'])}; retrying`);
      else if (name === 'fleet_command')
        print(
          `fleet: ${String(detail['request'])} on ch ${String(detail['channel'])} ${detail['ok'] ? 'taken' : `refused (${String(detail['code'])}: ${String(detail['why'])})`}`,
        );
    },
  });
}

/** The runner, each of whose runs is filed into the registry once its result is written. */
export function filingRunner(
  runner: ChannelRunner,
  registry: string,
  print: (line: string) => void,
): ChannelRunner {
  return async (r) => {
    const run = await runner(r);
    const key = channelKey(r.plan.rig, r.plan.channel);
    const done = run.done.then(async (o) => {
      await fileAtRunEnd(registry, o.folder, o.result['cell_id'], (l) => print(`${key}: ${l}`));
      return o;
    });
    return {
      folder: run.folder,
      done,
      stop: (by) => run.stop(by),
      setCutoffPerCell: (v, by) => run.setCutoffPerCell(v, by),
      mark: (note, by) => run.mark(note, by),
    };
  };
}
