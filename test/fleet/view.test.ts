/**
 * Two stations and a fleet view on a real Mosquitto on loopback (password file and ACL as in
 * docs/fleet.md). Retained messages reaching a later subscriber is OASIS MQTT Version 5.0
 * §3.3.1.3 (from memory); the drill-down speaks the live feed's own protocol, checked with the
 * live feed's schemas.
 */
import { request } from 'node:http';
import type { MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveBroker } from '../../src/fleet/broker-options.js';
import { startFleetLink, type FleetLink } from '../../src/fleet/fleet-link.js';
import { startFleetView, type FleetView } from '../../src/fleet/fleet-view.js';
import type { FleetResult } from '../../src/fleet/payloads.js';
import { channelTopic } from '../../src/fleet/topics.js';
import { checkServerMessage } from '../../src/live/message-schemas.js';
import { watchLive } from '../../src/live/watch-client.js';
import { liveSocketUrl } from '../../src/live/watch-view.js';
import { bareClient, CONTROL_TOKEN, handFedHub, JsonSocket, sample, until } from './helpers.js';
import { startBroker, type TestBroker } from './mosquitto.js';

const ACCOUNTS = [
  { username: 'bench-a', password: 'pa-ss-a' },
  { username: 'bench-b', password: 'pa-ss-b' },
  { username: 'fleet', password: 'fl-ee-t' },
];
const VIEW_TOKENS = { control: 'c'.repeat(64), viewer: 'v'.repeat(64) };

let broker: TestBroker;
const a = handFedHub('cell-a');
const b = handFedHub('cell-b');
let links: FleetLink[] = [];
const views: FleetView[] = [];
const filed: FleetResult[] = [];

const creds = (name: string) => broker.credentialsFile(ACCOUNTS.find((x) => x.username === name)!);

function view(): Promise<FleetView> {
  return startFleetView({
    broker: resolveBroker(
      { url: broker.url, credentialsFile: creds('fleet') },
      `fleet-${views.length}`,
    ),
    listen: '127.0.0.1:0',
    tokenStore: VIEW_TOKENS,
    fileResult: (r) => filed.push(r),
  }).then((v) => (views.push(v), v));
}

beforeAll(async () => {
  broker = await startBroker(ACCOUNTS);
  links = (['bench-a', 'bench-b'] as const).map((station, i) =>
    startFleetLink({
      broker: resolveBroker({ url: broker.url, credentialsFile: creds(station) }, `cv-${station}`),
      station,
      channels: [{ channel: i, hub: (i === 0 ? a : b).hub }],
      controlToken: CONTROL_TOKEN,
      sampleHz: 1000,
      statusEveryMs: 200,
    }),
  );
  await until('both stations online', () => links.every((l) => l.stats().connected));
});

afterAll(async () => {
  await Promise.all(views.map((v) => v.close()));
  await Promise.all(links.map((l) => l.close(500)));
  await broker?.stop();
});

const ws = (v: FleetView, path: string) => v.url.replace('http', 'ws') + path;

describe('the fleet view', () => {
  it('shows every station and channel as tiles, live', async () => {
    const v = await view();
    await until('fleet view connected', () => v.connected);
    const page = new JsonSocket(ws(v, 'fleet'));
    await page.open;
    sample(a.hub, 10, 3.9);
    sample(b.hub, 10, 3.7);
    a.hub.state({ host_s: 11, from: 'discharging', to: 'stopping', why: 'cutoff' });
    const tile = (key: string) =>
      page
        .of('tile')
        .filter((t) => t['key'] === key)
        .at(-1);
    await until(
      'tiles of both stations',
      () => tile('bench-a/0') && tile('bench-b/1')?.['voltage_V'] === 3.7,
    );
    expect(tile('bench-b/1')).toMatchObject({
      station: 'bench-b',
      channel: 1,
      label: 'cell-b',
      state: 'discharging',
    });
    await until('state change on the tile', () => tile('bench-a/0')?.['state'] === 'stopping');
    expect(page.of('fleet')).toHaveLength(1);
    page.close();
  });

  it('drills down to a channel with the live page protocol and passes commands to the station, token and all', async () => {
    const v = views[0]!;
    const live = new JsonSocket(ws(v, 'live?station=bench-b&ch=1'));
    await live.open;
    await until('hello', () => live.of('hello').length === 1);
    expect((live.of('hello')[0]!['run'] as Record<string, unknown>)['label']).toBe('cell-b');
    live.send({ type: 'mark', v: 1, id: 'no', token: 'f'.repeat(64), note: 'from the fleet' });
    live.send({ type: 'set-cutoff', v: 1, id: 'low', token: CONTROL_TOKEN, cutoff_V: 2.4 });
    live.send({ type: 'mark', v: 1, id: 'yes', token: CONTROL_TOKEN, note: 'from the fleet' });
    const answer = (id: string) =>
      live.messages.find((m) => (m['type'] === 'ack' || m['type'] === 'error') && m['id'] === id);
    await until('three answers', () => answer('no') && answer('low') && answer('yes'));
    expect(answer('no')).toMatchObject({ type: 'error', code: 'unauthorized' });
    // 2.4 V is below the Li-ion floor of 2.5 V (common practice): refused at the station.
    expect(answer('low')).toMatchObject({
      type: 'error',
      code: 'refused',
      error: expect.stringContaining('floor'),
    });
    expect(answer('yes')).toMatchObject({ type: 'ack', request: 'mark' });
    expect(b.requests).toEqual([{ type: 'mark', note: 'from the fleet' }]);
    sample(b.hub, 12, 3.69);
    await until('sample on the drill-down', () =>
      live.of('sample').some((s) => s['voltage_V'] === 3.69),
    );
    for (const m of live.messages)
      expect(checkServerMessage(m), JSON.stringify(m).slice(0, 200)).toMatchObject({ ok: true });
    live.close();
  });

  it("lets `watch` follow one channel through the fleet view, from the channel page's address", async () => {
    const v = views[0]!;
    const got: string[] = [];
    const client = watchLive({
      url: liveSocketUrl(`${v.url}channel?station=bench-b&ch=1`),
      onLink: () => {},
      onMessage: (m) => got.push(m.type),
    });
    await until('hello through watch', () => got.includes('hello'));
    sample(b.hub, 13, 3.68);
    await until('a sample through watch', () => got.includes('sample'));
    client.stop();
    await client.done;
  });

  it('serves the overview page and, at /channel, the live page with its assets', async () => {
    const v = views[0]!;
    const page = await (await fetch(v.url)).text();
    expect(page).toContain('/assets/fleet.js');
    const channel = await (await fetch(`${v.url}channel?station=bench-b&ch=1`)).text();
    expect(channel).toContain('/assets/live.js');
    for (const asset of ['fleet.js', 'fleet.css', 'live.js', 'live.css', 'uplot.js'])
      expect((await fetch(`${v.url}assets/${asset}`)).status, asset).toBe(200);
  });

  it('files each result once, and a fleet view started later catches up from retained messages', async () => {
    a.hub.result({ capacity_Ah: 0.25, end_reason: 'cutoff' });
    await until('result filed', () => filed.length === 1);
    // The same result again (a station resending after a reconnect) is not filed twice.
    const again: MqttClient = await bareClient(broker, 'bench-a', 'pa-ss-a');
    await again.publishAsync(
      channelTopic('bench-a', 0, 'result'),
      JSON.stringify({
        v: 1,
        station: 'bench-a',
        channel: 0,
        run_id: '20261203-080000-cell-a',
        wall: new Date().toISOString(),
        result: { capacity_Ah: 0.25, end_reason: 'cutoff' },
      }),
      { qos: 1, retain: true },
    );
    await again.endAsync();
    const late = await view();
    const page = new JsonSocket(ws(late, 'fleet'));
    await page.open;
    // Both tiles, and station b's with its retained sample (which may come after its status).
    await until(
      'late view has both tiles',
      () =>
        late.state.channels.size === 2 && late.state.channels.get('bench-b/1')?.hub.status().sample,
    );
    const res = await fetch(`${late.url}api/fleet`);
    const snap = (await res.json()) as { tiles: Array<Record<string, unknown>> };
    const tileA = snap.tiles.find((t) => t['key'] === 'bench-a/0');
    expect(tileA).toMatchObject({ ended: true, end_reason: 'cutoff' });
    // The newest of station b's samples, 3.68 V or the next one.
    const tileB = snap.tiles.find((t) => t['key'] === 'bench-b/1');
    expect(Number(tileB?.['voltage_V'])).toBeCloseTo(3.685, 1);
    // The late view files the retained result too (the registry keeps one of each): wait for it.
    await until('late view filed', () =>
      filed.some((r, i) => i > 0 && r.run_id === '20261203-080000-cell-a'),
    );
    expect(filed.filter((r) => r.run_id === '20261203-080000-cell-a')).toHaveLength(2);
    page.close();
  });

  it("keeps the live feed's access rules: a foreign Host header or page origin is refused", async () => {
    const v = views[0]!;
    const status = await new Promise<number | undefined>((resolve, reject) =>
      request(v.url, { headers: { Host: 'attacker.example' } }, (res) => {
        res.resume();
        resolve(res.statusCode);
      })
        .on('error', reject)
        .end(),
    );
    expect(status).toBe(403);
    const upgrade = new JsonSocket(ws(v, 'fleet'), { origin: 'http://attacker.example' });
    await expect(upgrade.open).rejects.toThrow(/403/);
  });
});
