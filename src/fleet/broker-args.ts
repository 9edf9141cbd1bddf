import type { BrokerRequest } from './broker-options.js';

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
