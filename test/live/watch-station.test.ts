import { afterEach, describe, expect, it, vi } from 'vitest';
import yargs from 'yargs';
import { watchCommand } from '../../src/cli/commands/watch.js';
import { startLiveServer, type LiveServer } from '../../src/live/live-server.js';
import { StationFeed } from '../../src/live/station-feed.js';
import { loadTokens } from '../../src/live/tokens.js';
import {
  STATION_TABLE_WIDTH,
  stationEventLine,
  stationTable,
  type StationView,
} from '../../src/live/watch-station.js';
import { DEMO_RUN, scriptedDischarge, tempHome } from './helpers.js';

/** Eight channels of two rigs, in every state a tile can show (our own demo). */
function demoStation(): StationFeed {
  const feed = new StationFeed({ historyPoints: 50 });
  const ids = ['A-001', 'A-002 worn, blue wrap', null, 'A-004', 'N-11', 'N-12', 'A-005', null];
  ids.forEach((id, i) => feed.add(i < 4 ? 'left' : 'right-bench', i % 4, id));
  const keys = feed.keys();
  keys.slice(0, 7).forEach((k) => feed.hub(k)!.setRun({ ...DEMO_RUN, label: k }));
  for (const s of scriptedDischarge(3)) for (const k of keys.slice(0, 6)) feed.hub(k)!.sample(s);
  feed.hub(keys[1]!)!.result({ end_reason: 'cutoff', capacity_Ah: 1.5521 });
  feed.hub(keys[2]!)!.alarm({ host_s: 2, kind: 'fault', detail: 'thermistor_open' });
  feed.hub(keys[2]!)!.result({ end_reason: 'fault', capacity_Ah: 0.0123 });
  feed.hub(keys[3]!)!.result({ end_reason: 'over_temperature', capacity_Ah: 0.9 });
  feed.hub(keys[4]!)!.result({ end_reason: 'link_lost', capacity_Ah: 0.2 });
  return feed;
}

let server: LiveServer | null = null;
afterEach(async () => {
  await server?.close();
  server = null;
});

describe('watch: a station as a table', () => {
  it('fits 80 columns (a terminal of the classic width), one line per channel in rig and channel order', () => {
    const view: StationView = { channels: demoStation().overview().channels, link: 'live' };
    const lines = stationTable(view);
    expect(STATION_TABLE_WIDTH).toBeLessThanOrEqual(79);
    for (const l of lines) expect([...l].length).toBeLessThanOrEqual(79);
    expect(lines[0]).toBe('station: 8 channels, 3 running  [live]');
    expect(lines[1]).toMatch(/^CHANNEL +CELL +STATE +V +A +mAh +°C +TO CUT +ALARM$/);
    const rows = lines.slice(2);
    expect(rows.map((r) => r.split(' ')[0])).toEqual([
      'left/0',
      'left/1',
      'left/2',
      'left/3',
      'right-ben…',
      'right-ben…',
      'right-ben…',
      'right-ben…',
    ]);
    expect(rows[1]).toMatch(/^left\/1 +A-002 wor… cutoff +\S+ +\S+ +1552 /);
    expect(rows[2]).toMatch(/fault .* fault$/);
    expect(rows[3]).toContain('over-temp');
    expect(rows[4]).toContain('link lost');
    expect(rows[7]).toMatch(/idle/);
  });

  it('event lines name their channel', () => {
    expect(
      stationEventLine({
        type: 'alarm',
        v: 1,
        channel: 'left/2',
        host_s: 3,
        kind: 'fault',
        detail: 'thermistor_open',
      }),
    ).toBe('left/2 ! fault: thermistor_open');
  });

  it('the watch command shows a station as its table when not on a terminal', async () => {
    const { tokens } = loadTokens(tempHome());
    const feed = demoStation();
    server = await startLiveServer({
      station: feed,
      listen: '127.0.0.1:0',
      tokenStore: tokens,
      overviewMs: 50,
    });
    const out: string[] = [];
    const spy = vi.spyOn(process.stdout, 'write').mockImplementation((c: string | Uint8Array) => {
      out.push(String(c));
      return true;
    });
    const before = process.listenerCount('SIGINT');
    try {
      void yargs(['watch', server.url, '--interval', '0']).command(watchCommand).parseAsync();
      await vi.waitFor(() => expect(out.join('')).toContain('CHANNEL'));
      feed.hub('left/0')!.state({ host_s: 3, from: 'discharging', to: 'stopping', why: 'stop' });
      await vi.waitFor(() => expect(out.join('')).toContain('left/0 discharging -> stopping'));
    } finally {
      spy.mockRestore();
      // Ends the command as Ctrl-C would.
      process
        .listeners('SIGINT')
        .slice(before)
        .forEach((l) => (l as () => void)());
    }
  });
});
