/**
 * A station's link against a real Mosquitto on loopback, with a password file and the ACL of
 * docs/fleet.md. Protocol facts checked here are those of OASIS MQTT Version 5.0 (from
 * memory): retained messages are handed to a later subscriber (§3.3.1.3), the will is published
 * when a client goes without a DISCONNECT (§3.1.2.5), and a publish the broker does not allow is
 * answered with reason code 0x87 "Not authorized" (§3.4.2.1).
 */
import { spawn } from 'node:child_process';
import type { MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveBroker } from '../../src/fleet/broker-options.js';
import { startFleetLink, type FleetLink } from '../../src/fleet/fleet-link.js';
import { parsePayload } from '../../src/fleet/payloads.js';
import { channelTopic, stationTopic } from '../../src/fleet/topics.js';
import { bareClient, CONTROL_TOKEN, handFedHub, sample, until } from './helpers.js';
import { startBroker, type TestBroker } from './mosquitto.js';

const ACCOUNTS = [
  { username: 'bench-a', password: 'pa-ss-a' },
  { username: 'bench-b', password: 'pa-ss-b' },
  { username: 'fleet', password: 'fl-ee-t' },
];

let broker: TestBroker;
let watcher: MqttClient;
const seen: Array<{ topic: string; payload: Buffer; retain: boolean }> = [];

beforeAll(async () => {
  broker = await startBroker(ACCOUNTS);
  watcher = await bareClient(broker, 'fleet', 'fl-ee-t');
  watcher.on('message', (topic, payload, packet) =>
    seen.push({ topic, payload, retain: packet.retain }),
  );
  await watcher.subscribeAsync('cellvigil/v1/#', { qos: 1 });
});

afterAll(async () => {
  await watcher?.endAsync();
  await broker?.stop();
});

function link(station: string, hub: ReturnType<typeof handFedHub>['hub']): FleetLink {
  const account = ACCOUNTS.find((a) => a.username === station)!;
  return startFleetLink({
    broker: resolveBroker(
      { url: broker.url, credentialsFile: broker.credentialsFile(account) },
      `cv-${station}`,
    ),
    station,
    channels: [{ channel: 0, hub }],
    controlToken: CONTROL_TOKEN,
    sampleHz: 1000,
    backoffMinMs: 100,
    backoffMaxMs: 400,
  });
}

const payloads = (topic: string) =>
  seen
    .filter((m) => m.topic === topic)
    .map((m) => JSON.parse(m.payload.toString()) as Record<string, unknown>);

describe('a station on the broker', () => {
  it('publishes samples, states, alarms, results and retained statuses that validate, under its own topics', async () => {
    const a = handFedHub('cell-a');
    const l = link('bench-a', a.hub);
    await until('station online', () => l.stats().connected);
    sample(a.hub, 1, 4.1);
    a.hub.state({ host_s: 1, from: 'starting', to: 'discharging', why: 'load on' });
    a.hub.alarm({ host_s: 2, kind: 'link_down', detail: "the rig's port went away" });
    sample(a.hub, 2, 4.0);
    a.hub.result({ capacity_Ah: 0.5, end_reason: 'cutoff' });
    await until('result', () => payloads(channelTopic('bench-a', 0, 'result')).length > 0);
    const samples = payloads(channelTopic('bench-a', 0, 'sample'));
    expect(samples.map((s) => s['voltage_V'])).toEqual([4.1, 4.0]);
    for (const [kind, topic] of [
      ['sample', 'sample'],
      ['state', 'state'],
      ['alarm', 'alarm'],
      ['result', 'result'],
      ['status', 'status'],
    ] as const)
      for (const m of seen.filter((x) => x.topic === channelTopic('bench-a', 0, topic)))
        expect(parsePayload(kind, m.payload)).toMatchObject({ ok: true });
    const station = payloads(stationTopic('bench-a'));
    expect(station[station.length - 1]).toMatchObject({
      station: 'bench-a',
      online: true,
      channels: [0],
    });
    await l.close();
    await until('offline status', () =>
      payloads(stationTopic('bench-a')).some((s) => s['online'] === false),
    );
  });

  it('sends at most sampleHz samples a second per channel, always the newest at the end', async () => {
    const c = handFedHub('cell-c');
    const l = startFleetLink({
      broker: resolveBroker(
        { url: broker.url, credentialsFile: broker.credentialsFile(ACCOUNTS[0]!) },
        'cv-rate',
      ),
      station: 'bench-a',
      channels: [{ channel: 5, hub: c.hub }],
      controlToken: null,
      sampleHz: 4,
    });
    await until('station online', () => l.stats().connected);
    const topic = channelTopic('bench-a', 5, 'sample');
    const t0 = Date.now();
    // 100 samples a second for one second: a burst of frames as a fast rig sends them.
    for (let i = 1; i <= 100; i++) {
      sample(c.hub, i / 100, 4 - i / 1000);
      await new Promise((r) => setTimeout(r, 10));
    }
    const span = (Date.now() - t0) / 1000;
    await new Promise((r) => setTimeout(r, 400));
    const got = payloads(topic).map((p) => p['voltage_V']);
    expect(got.length).toBeGreaterThanOrEqual(2);
    expect(got.length).toBeLessThanOrEqual(Math.ceil(span * 4) + 1);
    expect(got.at(-1)).toBeCloseTo(3.9, 9);
    await l.close(500);
  });

  // The topic table of docs/fleet.md: a channel's status every statusEveryMs while samples come.
  it("refreshes a channel's status on its own samples' time, the last sample too, and leaves an idle channel's alone", async () => {
    const busy = handFedHub('cell-busy');
    const idle = handFedHub('cell-idle');
    const l = startFleetLink({
      broker: resolveBroker(
        { url: broker.url, credentialsFile: broker.credentialsFile(ACCOUNTS[1]!) },
        'cv-refresh',
      ),
      station: 'bench-b',
      channels: [
        { channel: 6, hub: busy.hub },
        { channel: 7, hub: idle.hub },
      ],
      controlToken: null,
      sampleHz: 1000,
      statusEveryMs: 300,
    });
    await until('station online', () => l.stats().connected);
    const statuses = (ch: number) => payloads(channelTopic('bench-b', ch, 'status'));
    await until('first statuses', () => statuses(6).length >= 1 && statuses(7).length >= 1);
    const t0 = Date.now();
    for (let i = 1; i <= 24; i++) {
      sample(busy.hub, i / 20, 4 - i / 1000);
      await new Promise((r) => setTimeout(r, 50));
    }
    const span = Date.now() - t0;
    // The samples stop: the last one still reaches the status, once it is due.
    await until('the last sample in the status', () =>
      statuses(6).some((p) => p['voltage_V'] === 3.976),
    );
    const refreshed = statuses(6).slice(1);
    expect(refreshed.length).toBeGreaterThanOrEqual(2);
    expect(refreshed.length).toBeLessThanOrEqual(Math.ceil(span / 300) + 1);
    // Each refresh carries the sample it followed: a later one, a lower voltage.
    const volts = refreshed.map((p) => p['voltage_V'] as number);
    expect(volts).toEqual([...volts].sort((a, b) => b - a));
    expect(volts[0]).toBeLessThan(4);
    expect(statuses(7)).toHaveLength(1);
    await l.close(500);
  });

  it('takes a command only with the control token, and counts the refusals', async () => {
    const b = handFedHub('cell-b');
    const l = link('bench-b', b.hub);
    await until('station online', () => l.stats().connected);
    const cmd = channelTopic('bench-b', 0, 'command');
    const replies = () => payloads(channelTopic('bench-b', 0, 'reply'));
    await watcher.publishAsync(
      cmd,
      JSON.stringify({
        v: 1,
        station: 'bench-b',
        channel: 0,
        type: 'mark',
        note: 'x',
        token: 'wrong',
        id: 'c1',
      }),
      { qos: 1 },
    );
    await watcher.publishAsync(cmd, '{"v":1,"type":"stop"', { qos: 1 });
    await watcher.publishAsync(
      cmd,
      JSON.stringify({
        v: 1,
        station: 'bench-b',
        channel: 0,
        type: 'set-cutoff',
        cutoff_V: 2.0,
        token: CONTROL_TOKEN,
        id: 'c2',
      }),
      { qos: 1 },
    );
    await watcher.publishAsync(
      cmd,
      JSON.stringify({
        v: 1,
        station: 'bench-b',
        channel: 0,
        type: 'set-cutoff',
        cutoff_V: 3.1,
        token: CONTROL_TOKEN,
        id: 'c3',
      }),
      { qos: 1 },
    );
    await until('four replies', () => replies().length >= 4);
    const r = replies();
    expect(r[0]).toMatchObject({ id: 'c1', ok: false, code: 'unauthorized' });
    expect(r[1]).toMatchObject({ id: null, ok: false, code: 'malformed' });
    // Below the Li-ion floor of 2.5 V (common practice): the hub refuses before the daemon sees it.
    expect(r[2]).toMatchObject({ id: 'c2', ok: false, code: 'refused' });
    expect(r[3]).toMatchObject({ id: 'c3', ok: true, request: 'set-cutoff' });
    expect(b.requests).toEqual([{ type: 'set-cutoff', cutoff_V: 3.1 }]);
    expect(l.stats()).toMatchObject({ commandsTaken: 1, commandsRefused: 3 });
    await until('refusals in the station status', () =>
      payloads(stationTopic('bench-b')).some((s) => s['commands_refused'] === 3),
    );
    await l.close();
  });

  it('is marked offline by its last will when its daemon dies without a goodbye (SIGKILL)', async () => {
    const creds = broker.credentialsFile(ACCOUNTS[0]!);
    const dist = (rel: string) =>
      JSON.stringify(new URL(`../../dist/${rel}`, import.meta.url).href);
    const script = `
      const { LiveHub } = await import(${dist('live/live-hub.js')});
      const { startFleetLink } = await import(${dist('fleet/fleet-link.js')});
      const { resolveBroker } = await import(${dist('fleet/broker-options.js')});
      const link = startFleetLink({
        broker: resolveBroker({ url: ${JSON.stringify(broker.url)}, credentialsFile: ${JSON.stringify(creds)} }, 'cv-doomed'),
        station: 'bench-a', channels: [{ channel: 0, hub: new LiveHub() }], controlToken: null,
      });
      const t = setInterval(() => { if (link.stats().connected) { console.log('up'); clearInterval(t); } }, 20);`;
    const child = spawn(process.execPath, ['--input-type=module', '-e', script], {
      stdio: ['ignore', 'pipe', 'inherit'],
    });
    let out = '';
    child.stdout!.on('data', (d: Buffer) => (out += d.toString()));
    await until('the doomed station online', () => out.includes('up'));
    const before = seen.length;
    child.kill('SIGKILL');
    await until('the last will', () =>
      seen
        .slice(before)
        .some(
          (m) =>
            m.topic === stationTopic('bench-a') && m.payload.toString().includes('"online":false'),
        ),
    );
    const will = seen
      .slice(before)
      .find(
        (m) =>
          m.topic === stationTopic('bench-a') && m.payload.toString().includes('"online":false'),
      )!;
    expect(parsePayload('station', will.payload)).toMatchObject({
      ok: true,
      value: { station: 'bench-a', online: false, reason: 'connection lost' },
    });
  });

  it("keeps a station out of another station's topics (ACL)", async () => {
    const intruder = await bareClient(broker, 'bench-a', 'pa-ss-a');
    const forged = JSON.stringify({ v: 1, station: 'bench-b', online: true, wall: 'forged' });
    await expect(
      intruder.publishAsync(stationTopic('bench-b'), forged, { qos: 1 }),
    ).rejects.toThrow(/Not authorized/i);
    const cmd = JSON.stringify({
      v: 1,
      station: 'bench-b',
      channel: 0,
      type: 'stop',
      token: CONTROL_TOKEN,
    });
    await expect(
      intruder.publishAsync(channelTopic('bench-b', 0, 'command'), cmd, { qos: 1 }),
    ).rejects.toThrow(/Not authorized/i);
    await new Promise((r) => setTimeout(r, 300));
    expect(seen.some((m) => m.payload.toString() === forged || m.payload.toString() === cmd)).toBe(
      false,
    );
    await intruder.endAsync();
  });
});
