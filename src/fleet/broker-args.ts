import {
  checkStationId,
  defaultStationId,
  resolveBroker,
  type BrokerRequest,
} from './broker-options.js';
import type { FleetRunRequest } from './fleet-link.js';

/** The broker options shared by `run` and `fleet`, as yargs parses them. */
export interface BrokerArgs {
  broker: string | undefined;
  'broker-client-id': string | undefined;
  'broker-credentials': string | undefined;
  'broker-ca': string | undefined;
  'broker-cert': string | undefined;
  'broker-key': string | undefined;
}

/** The broker options' definitions, for yargs' `.options()`. */
export function brokerOptions(what: string) {
  return {
    broker: {
      type: 'string',
      describe: `MQTT broker to ${what}: mqtt://host:1883, mqtts://host:8883, ws:// or wss://`,
    },
    'broker-client-id': { type: 'string', describe: 'MQTT client id (unique on the broker)' },
    'broker-credentials': {
      type: 'string',
      describe: 'JSON file {"username","password"}, readable by its owner only',
    },
    'broker-ca': {
      type: 'string',
      describe: "PEM file of the authority that signed the broker's certificate",
    },
    'broker-cert': {
      type: 'string',
      describe: 'PEM client certificate, for a broker that asks for one',
    },
    'broker-key': { type: 'string', describe: 'PEM key of the client certificate' },
  } as const;
}

export function brokerRequest(a: BrokerArgs & { broker: string }): BrokerRequest {
  return {
    url: a.broker,
    ...(a['broker-client-id'] !== undefined ? { clientId: a['broker-client-id'] } : {}),
    ...(a['broker-credentials'] !== undefined ? { credentialsFile: a['broker-credentials'] } : {}),
    ...(a['broker-ca'] !== undefined ? { caFile: a['broker-ca'] } : {}),
    ...(a['broker-cert'] !== undefined ? { certFile: a['broker-cert'] } : {}),
    ...(a['broker-key'] !== undefined ? { keyFile: a['broker-key'] } : {}),
  };
}

/** What a daemon that publishes (`run`, `station`) takes beside the broker options. */
export interface PublishArgs extends BrokerArgs {
  station: string | undefined;
  'broker-sample-rate': number;
}

/** The publishing options' definitions: the broker's, the station id and the sample rate. */
export function publishOptions() {
  return {
    ...brokerOptions('publish to (docs/fleet.md)'),
    station: {
      type: 'string',
      describe: "This station's id on the broker (default: the host name)",
    },
    'broker-sample-rate': {
      type: 'number',
      default: 2,
      describe: 'Samples per second and channel sent to the broker (the newest of each interval)',
    },
  } as const;
}

/** Checks the publishing options together (yargs `.check`); throws the message to show. */
export function checkPublishArgs(a: PublishArgs & { live: boolean }): true {
  if (a.broker !== undefined && a.live === false)
    throw new Error('--broker publishes what the live feed shows: drop --no-live.');
  if (!(a['broker-sample-rate'] > 0 && a['broker-sample-rate'] <= 20))
    throw new Error('--broker-sample-rate must be above 0 and at most 20.');
  return true;
}

/**
 * What `--broker …` resolves to, or nothing without a broker. Resolved before anything is
 * switched on, so a wrong option or credentials file stops the daemon before a load is on.
 */
export function resolvePublishing(a: PublishArgs): FleetRunRequest {
  if (a.broker === undefined) return {};
  const station = a.station !== undefined ? checkStationId(a.station) : defaultStationId();
  return {
    fleet: {
      broker: resolveBroker(brokerRequest({ ...a, broker: a.broker }), `cellvigil-${station}`),
      station,
      sampleHz: a['broker-sample-rate'],
    },
  };
}
