import type { LiveTokens } from '../live/tokens.js';
import { openBroker } from './broker-connection.js';
import type { BrokerConfig } from './broker-options.js';
import { startFleetServer, type FleetServer } from './fleet-server.js';
import { FleetState } from './fleet-state.js';
import type { FleetResult } from './payloads.js';
import { channelTopic, FLEET_SUBSCRIPTIONS, SENDER_PROPERTY } from './topics.js';

/**
 * Where every result the fleet view sees goes besides the page: the seam for filing results
 * into the cell registry. Called once per station and run for the life of the process; a
 * registry must itself take a result it already holds as a no-op (a restarted fleet view sees
 * each retained result again).
 */
export type ResultFiler = (r: FleetResult) => void;

export interface FleetViewOptions {
  broker: BrokerConfig;
  listen: string;
  tokenStore: LiveTokens;
  fileResult?: ResultFiler;
  origins?: readonly string[];
  log?: (name: string, detail: Record<string, unknown>) => void;
  backoffMinMs?: number;
  backoffMaxMs?: number;
}

export interface FleetView {
  url: string;
  state: FleetState;
  server: FleetServer;
  readonly connected: boolean;
  close(): Promise<void>;
}

/** Subscribes to every station on the broker and serves the fleet page. */
export async function startFleetView(o: FleetViewOptions): Promise<FleetView> {
  const log = o.log ?? (() => {});
  const state = new FleetState();
  let server: FleetServer | null = null;
  const conn = openBroker({
    config: o.broker,
    onConnect: () => {
      log('fleet_connected', { broker: o.broker.url });
      // A new subscription hands over every retained status and result again: the view
      // catches up after the broker or the view itself was away.
      conn.client.subscribe(FLEET_SUBSCRIPTIONS, { qos: 1 });
    },
    onDown: (why) => log('fleet_down', { broker: o.broker.url, why }),
    ...(o.backoffMinMs !== undefined ? { backoffMinMs: o.backoffMinMs } : {}),
    ...(o.backoffMaxMs !== undefined ? { backoffMaxMs: o.backoffMaxMs } : {}),
  });
  conn.client.on('message', (topic, payload) => {
    const change = state.apply(topic, payload);
    if (change?.kind === 'result' && o.fileResult) {
      try {
        o.fileResult(change.result);
      } catch (e) {
        log('fleet_result_not_filed', {
          station: change.result.station,
          run_id: change.result.run_id,
          why: (e as Error).message,
        });
      }
    }
    server?.changed(change);
  });
  try {
    server = await startFleetServer({
      state,
      listen: o.listen,
      tokenStore: o.tokenStore,
      ...(o.origins ? { origins: o.origins } : {}),
      log,
      sendCommand: (c, from) => {
        if (!conn.connected) return false;
        // Who asked travels beside the payload (an MQTT 5 user property), for the station's log.
        const sender = `fleet view ${String(o.broker.options.clientId)}, ${from}`;
        conn.client.publish(channelTopic(c.station, c.channel, 'command'), JSON.stringify(c), {
          qos: 1,
          properties: { userProperties: { [SENDER_PROPERTY]: sender } },
        });
        return true;
      },
    });
  } catch (e) {
    await conn.close(0);
    throw e;
  }
  const s = server;
  return {
    url: s.url,
    state,
    server: s,
    get connected() {
      return conn.connected;
    },
    close: async () => {
      await Promise.all([s.close(), conn.close(1000)]);
    },
  };
}
