import mqtt, { type MqttClient } from 'mqtt';
import { WebSocket } from 'ws';
import { LiveHub } from '../../src/live/live-hub.js';
import type { ControlRequest, LiveRunInfo } from '../../src/live/live-types.js';
import type { TestBroker } from './mosquitto.js';

export const CONTROL_TOKEN = 'a'.repeat(64);

export function runInfo(label: string, folder = `/runs/20261203-080000-${label}`): LiveRunInfo {
  return {
    label,
    run_folder: folder,
    chemistry: 'li-ion',
    cells: 1,
    cutoff_V: 3.0,
    floor_V: 2.5,
    calibration_id: 'none',
    started_wall: '2026-12-03T08:00:00.000Z',
    source: 'test',
    max_temperature_C: 60,
  };
}

/** A hub with a run on it whose control requests are recorded and accepted. */
export function handFedHub(label: string): { hub: LiveHub; requests: ControlRequest[] } {
  const hub = new LiveHub();
  const requests: ControlRequest[] = [];
  hub.setRun(runInfo(label));
  hub.onControl((c) => {
    requests.push(c);
    if (c.type === 'set-cutoff') hub.cutoffChanged(c.cutoff_V);
    return { ok: true };
  });
  return { hub, requests };
}

export function sample(hub: LiveHub, host_s: number, voltage_V: number): void {
  hub.sample({
    host_s,
    voltage_V,
    current_A: 0.5,
    temperature_C: 25,
    charge_Ah: host_s * (0.5 / 3600),
    energy_Wh: host_s * (0.5 / 3600) * voltage_V,
    state: 'discharging',
    load_on: true,
  });
}

/** A bare client of the mqtt package, as any other program on the broker would be. */
export async function bareClient(
  broker: TestBroker,
  username: string,
  password: string,
): Promise<MqttClient> {
  const c = mqtt.connect(broker.url, {
    username,
    password,
    protocolVersion: 5,
    reconnectPeriod: 200,
    clientId: `${username}-${Math.random().toString(16).slice(2)}`,
  });
  await new Promise<void>((resolve, reject) => {
    c.once('connect', () => resolve());
    c.once('error', reject);
  });
  return c;
}

export async function until<T>(
  what: string,
  probe: () => T | undefined | null | false,
  ms = 10_000,
): Promise<T> {
  const t0 = Date.now();
  for (;;) {
    const v = probe();
    if (v) return v;
    if (Date.now() - t0 > ms) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

/** A WebSocket client that keeps every JSON message it receives. */
export class JsonSocket {
  readonly messages: Array<Record<string, unknown>> = [];
  readonly ws: WebSocket;
  readonly open: Promise<void>;

  constructor(url: string, o: { origin?: string } = {}) {
    this.ws = new WebSocket(url, o);
    this.ws.on('message', (d) =>
      this.messages.push(JSON.parse(d.toString()) as Record<string, unknown>),
    );
    this.open = new Promise((resolve, reject) => {
      this.ws.once('open', () => resolve());
      this.ws.once('error', reject);
    });
  }

  of(type: string): Array<Record<string, unknown>> {
    return this.messages.filter((m) => m['type'] === type);
  }

  send(m: unknown): void {
    this.ws.send(JSON.stringify(m));
  }

  close(): void {
    this.ws.close();
  }
}
