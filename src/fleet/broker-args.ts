import type { Argv } from 'yargs';
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

export function withBrokerOptions<T>(y: Argv<T>, what: string): Argv<T & BrokerArgs> {
  return y
    .option('broker', {
      type: 'string',
      describe: `MQTT broker to ${what}: mqtt://host:1883, mqtts://host:8883, ws:// or wss://`,
    })
    .option('broker-client-id', {
      type: 'string',
      describe: 'MQTT client id (unique on the broker)',
    })
    .option('broker-credentials', {
      type: 'string',
      describe: 'JSON file {"username","password"}, readable by its owner only',
    })
    .option('broker-ca', {
      type: 'string',
      describe: "PEM file of the authority that signed the broker's certificate",
    })
    .option('broker-cert', {
      type: 'string',
      describe: 'PEM client certificate, for a broker that asks for one',
    })
    .option('broker-key', {
      type: 'string',
      describe: 'PEM key of the client certificate',
    }) as Argv<T & BrokerArgs>;
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
