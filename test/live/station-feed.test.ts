import { afterEach, describe, expect, it } from 'vitest';
import { startLiveServer, type LiveServer } from '../../src/live/live-server.js';
import type { StationControlRequest } from '../../src/live/live-types.js';
import { checkClientMessage, checkServerMessage } from '../../src/live/message-schemas.js';
import { StationFeed } from '../../src/live/station-feed.js';
import { loadTokens } from '../../src/live/tokens.js';
import { DEMO_RUN, scriptedDischarge, tempHome, Viewer } from './helpers.js';

interface Station {
  feed: StationFeed;
  server: LiveServer;
  control: string;
  asked: Array<[string, StationControlRequest]>;
}

let station: Station | null = null;
const viewers: Viewer[] = [];
afterEach(async () => {
  viewers.splice(0).forEach((v) => v.close());
  await station?.server.close();
  station = null;
});

/** Two rigs of two channels (our own demo); channel right/1 has no run yet. */
async function startStation(): Promise<Station> {
  const feed = new StationFeed({ historyPoints: 100 });
  for (const [rig, ch] of [
    ['left', 0],
    ['left', 1],
    ['right', 0],
    ['right', 1],
  ] as const)
    feed.add(rig, ch, `cell-${rig}-${ch}`);
  for (const key of ['left/0', 'left/1', 'right/0'])
    feed.hub(key)!.setRun({ ...DEMO_RUN, label: key });
  const asked: Array<[string, StationControlRequest]> = [];
  feed.onControl((key, c) => {
    asked.push([key, c]);
    return { ok: true };
  });
  const { tokens } = loadTokens(tempHome());
  const server = await startLiveServer({
    station: feed,
    listen: '127.0.0.1:0',
    tokenStore: tokens,
    overviewMs: 50,
  });
  return { feed, server, control: tokens.control, asked };
}

function viewer(server: LiveServer, query: string): Viewer {
  const v = new Viewer(`ws://127.0.0.1:${server.port}/live${query}`);
  viewers.push(v);
  return v;
}

describe('live feed of a station', () => {
  it('the overview lists every channel in rig and channel order, with its cell, run and latest figures', async () => {
    station = await startStation();
    const left0 = station.feed.hub('left/0')!;
    for (const s of scriptedDischarge(5)) left0.sample(s);
    left0.alarm({ host_s: 4, kind: 'over_temperature', detail: '61 °C' });
    const o = station.feed.overview();
    expect(checkServerMessage(JSON.parse(JSON.stringify(o)))).toMatchObject({ ok: true });
    expect(o.channels.map((c) => c.channel)).toEqual(['left/0', 'left/1', 'right/0', 'right/1']);
    expect(o.channels[0]).toMatchObject({
      rig: 'left',
      ch: 0,
      cell_id: 'cell-left-0',
      status: { sample: { host_s: 4 } },
      alarm: { kind: 'over_temperature' },
    });
    expect(o.channels[3]!.run).toBeNull();
  });

  it("an overview viewer gets the station on connect and a few times a second, and every channel's events tagged with their channel", async () => {
    station = await startStation();
    const v = viewer(station.server, '?view=station');
    await v.until((x) => x.of('station').length >= 1);
    const right0 = station.feed.hub('right/0')!;
    for (const s of scriptedDischarge(3)) right0.sample(s);
    right0.state({ host_s: 2, from: 'discharging', to: 'stopping', why: 'cutoff reached' });
    await v.until((x) => x.of('state').length === 1 && x.of('station').length >= 3);
    expect(v.of('state')[0]!.channel).toBe('right/0');
    // Samples reach an overview through the overview itself, never one by one.
    expect(v.of('sample')).toHaveLength(0);
    expect(v.of('station').at(-1)!.channels[2]!.status.sample?.host_s).toBe(2);
    for (const m of v.messages) expect(checkServerMessage(m)).toMatchObject({ ok: true });
  });

  it('a channel viewer gets its own channel only; without a channel a one-run viewer follows the first', async () => {
    station = await startStation();
    const one = viewer(station.server, `?channel=${encodeURIComponent('left/1')}`);
    const plain = viewer(station.server, '');
    await one.until((x) => x.of('hello').length === 1);
    await plain.until((x) => x.of('hello').length === 1);
    expect(one.of('hello')[0]).toMatchObject({ channel: 'left/1', run: { label: 'left/1' } });
    expect(plain.of('hello')[0]).toMatchObject({ channel: 'left/0' });
    for (const s of scriptedDischarge(3)) station.feed.hub('left/0')!.sample(s);
    station.feed.hub('left/1')!.alarm({ host_s: 1, kind: 'fault', detail: 'thermistor_open' });
    await one.until((x) => x.of('alarm').length === 1);
    await plain.until((x) => x.of('sample').length >= 1);
    expect(one.of('sample')).toHaveLength(0);
    expect(one.of('alarm')[0]!.channel).toBe('left/1');
    expect(plain.of('alarm')).toHaveLength(0);
    expect(plain.of('sample').every((s) => s.channel === 'left/0')).toBe(true);
  });

  it('a channel the station lacks is a 404, on the socket and on /api/state', async () => {
    station = await startStation();
    const v = viewer(station.server, '?channel=left/9');
    await expect(v.opened()).rejects.toThrow(/404/);
    const r = await fetch(`${station.server.url}api/state?channel=left/9`);
    expect(r.status).toBe(404);
    const all = await (await fetch(`${station.server.url}api/state?view=station`)).json();
    expect(checkServerMessage(all)).toMatchObject({ ok: true, value: { type: 'station' } });
  });

  it('controls go to the channel named, or the one followed; a cutoff below the floor never reaches the station', async () => {
    station = await startStation();
    const all = viewer(station.server, '?view=station');
    const one = viewer(station.server, '?channel=right/0');
    await all.until((x) => x.of('station').length >= 1);
    await one.until((x) => x.of('hello').length === 1);
    const send = (v: Viewer, m: Record<string, unknown>) =>
      v.ws.send(JSON.stringify({ v: 1, token: station!.control, ...m }));
    send(all, { type: 'stop', channel: 'left/1', id: 'a' });
    send(all, { type: 'start', channel: 'right/1', cell_id: 'B-12', id: 'b' });
    send(one, { type: 'mark', note: 'swapped the clip', id: 'c' });
    // DEMO_RUN's floor is 5.0 V for the string.
    send(one, { type: 'set-cutoff', cutoff_V: 4.9, id: 'd' });
    send(all, { type: 'stop', id: 'e' });
    await all.until((x) => x.of('ack').length + x.of('error').length === 3);
    await one.until((x) => x.of('ack').length + x.of('error').length === 2);
    expect(station.asked).toEqual([
      ['left/1', { type: 'stop' }],
      ['right/1', { type: 'start', cell_id: 'B-12' }],
      ['right/0', { type: 'mark', note: 'swapped the clip' }],
    ]);
    expect(one.of('error')[0]).toMatchObject({ id: 'd', code: 'refused' });
    expect(all.of('error')[0]).toMatchObject({ id: 'e', code: 'refused' });
    expect(all.of('error')[0]!.error).toContain('which channel');
  });

  it('a start names its cell as the registry files it', () => {
    const base = { type: 'start', v: 1, token: 't', channel: 'left/0' };
    expect(checkClientMessage({ ...base, cell_id: 'LAB/A-017:2' })).toMatchObject({ ok: true });
    for (const bad of ['A\n017', 'A 017', '-A017', 'x'.repeat(65)])
      expect(checkClientMessage({ ...base, cell_id: bad })).toMatchObject({ ok: false });
  });

  it("the address of a station opens its overview page; ?channel opens that channel's page", async () => {
    station = await startStation();
    const overview = await (await fetch(station.server.url)).text();
    expect(overview).toContain('/assets/station.js');
    const detail = await (await fetch(`${station.server.url}?channel=left/0`)).text();
    expect(detail).toContain('/assets/live.js');
    const js = await fetch(`${station.server.url}assets/station.js`);
    expect(js.headers.get('content-type')).toMatch(/javascript/);
  });
});
