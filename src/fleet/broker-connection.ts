import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import type { BrokerConfig } from './broker-options.js';

export interface BrokerConnectionOptions {
  config: BrokerConfig;
  will?: IClientOptions['will'];
  /** Called on every (re)connection, after which the caller subscribes and publishes anew. */
  onConnect(): void;
  /** Called when the connection is lost or a connection attempt fails. */
  onDown(why: string): void;
  /** @default 1000 */
  backoffMinMs?: number;
  /** @default 30000 */
  backoffMaxMs?: number;
  /** @default 15 */
  keepaliveS?: number;
}

export interface BrokerConnection {
  readonly client: MqttClient;
  readonly connected: boolean;
  /** Connection attempts that failed or connections lost since the start. */
  readonly drops: number;
  /** Disconnects, waiting up to timeoutMs for messages in flight, then cuts the socket. */
  close(timeoutMs?: number): Promise<void>;
}

/**
 * One MQTT connection that comes back by itself. The client library's own reconnection runs
 * at a fixed period; here the delay doubles (with jitter) from backoffMinMs up to backoffMaxMs
 * and starts again at the bottom after a good connection, so a broker that is down for hours
 * is asked about twice a minute, not every second. Nothing is queued here: QoS 0 messages sent
 * while offline are dropped by the client (queueQoSZero off) and callers keep what they must.
 */
export function openBroker(o: BrokerConnectionOptions): BrokerConnection {
  const minMs = o.backoffMinMs ?? 1000;
  const maxMs = o.backoffMaxMs ?? 30_000;
  const client = mqtt.connect(o.config.url, {
    ...o.config.options,
    protocolVersion: 5,
    clean: true,
    keepalive: o.keepaliveS ?? 15,
    connectTimeout: 10_000,
    reconnectPeriod: 0,
    queueQoSZero: false,
    resubscribe: false,
    ...(o.will ? { will: o.will } : {}),
  });
  let attempt = 0;
  let drops = 0;
  let timer: NodeJS.Timeout | null = null;
  let closing = false;
  let lastError = '';

  client.on('connect', () => {
    attempt = 0;
    lastError = '';
    // Small messages are the whole traffic: none should wait for the last one's acknowledgement
    // (Nagle's algorithm, which the client library leaves on). A WebSocket transport has no such
    // call and is left as it is.
    (client.stream as { setNoDelay?: (on: boolean) => void } | undefined)?.setNoDelay?.(true);
    o.onConnect();
  });
  // Errors (refused credentials, a broken socket) are followed by `close`, which retries.
  client.on('error', (e) => (lastError = e.message));
  client.on('close', () => {
    if (closing || timer) return;
    drops++;
    const delay = Math.min(maxMs, minMs * 2 ** attempt) * (0.75 + Math.random() * 0.5);
    attempt++;
    o.onDown(lastError || 'connection closed');
    timer = setTimeout(() => {
      timer = null;
      if (!closing) client.reconnect();
    }, delay);
    timer.unref();
  });

  return {
    client,
    get connected() {
      return client.connected;
    },
    get drops() {
      return drops;
    },
    close: (timeoutMs = 2000) => {
      closing = true;
      if (timer) clearTimeout(timer);
      return new Promise<void>((resolve) => {
        const force = setTimeout(() => client.end(true, {}, () => resolve()), timeoutMs);
        client.end(false, {}, () => {
          clearTimeout(force);
          resolve();
        });
      });
    },
  };
}
