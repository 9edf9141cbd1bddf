/**
 * What happens around a run besides measuring it: while it goes, its live hub linked to the
 * fleet broker (`run --broker`); once its result.json is written, the run filed into the cell
 * registry. Neither can touch the run: the broker link never blocks it, and a registry that is
 * locked, full or damaged only leaves the run to be filed later (the run folder is the record).
 */
import { linkStation, type FleetLink, type FleetRunOptions } from '../fleet/fleet-link.js';
import type { LiveHub } from '../live/live-hub.js';
import { fileAtRunEnd } from '../registry/file-run.js';

export interface RunHooksRequest {
  channel: number;
  /** The registry to file the result in; absent: not filed (a station files its channels). */
  registry?: string;
  /** What `--broker …` resolved; absent: no broker. */
  fleet?: FleetRunOptions;
}

export interface RunHooks {
  /** After result.json is written: files the run when it has a cell id, and says so. */
  ended(folder: string, result: { cell_id?: string | null }): Promise<void>;
  /** Closes the broker link (marking the station offline), before the live feed closes. */
  close(): Promise<void>;
}

/**
 * Starts the broker link on the run's live hub, if a broker was given (there is a hub
 * whenever there is a broker: `--broker` needs the live feed).
 */
export function startRunHooks(
  req: RunHooksRequest,
  hub: LiveHub | null,
  print: (line: string) => void,
): RunHooks {
  let link: FleetLink | null = null;
  if (req.fleet && hub) {
    const { broker, station } = req.fleet;
    print(`fleet: publishing as station ${station} to ${broker.url} (channel ${req.channel})`);
    link = linkStation(req.fleet, hub, req.channel, (name, detail) => {
      // Connections and losses are worth a line; commands are in the event log as what they did.
      if (name === 'fleet_connected') print(`fleet: connected to ${broker.url}`);
      else if (name === 'fleet_down') print(`fleet: ${String(detail['why'])}; retrying`);
      else if (name === 'fleet_command' && detail['ok'] === false)
        print(`fleet: a command was refused (${String(detail['code'])}: ${String(detail['why'])})`);
    });
  }
  return {
    ended: async (folder, result) => {
      if (req.registry !== undefined)
        await fileAtRunEnd(req.registry, folder, result.cell_id, print);
    },
    close: async () => {
      await link?.close();
      link = null;
    },
  };
}
