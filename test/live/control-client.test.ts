import { afterEach, describe, expect, it, vi } from 'vitest';
import yargs from 'yargs';
import { controlCommand } from '../../src/cli/commands/control.js';
import { sendControl } from '../../src/live/control-client.js';
import { startLiveServer, type LiveServer } from '../../src/live/live-server.js';
import type { StationControlRequest } from '../../src/live/live-types.js';
import { StationFeed } from '../../src/live/station-feed.js';
import { loadTokens } from '../../src/live/tokens.js';
import { DEMO_RUN, tempHome } from './helpers.js';

let server: LiveServer | null = null;
afterEach(async () => {
  await server?.close();
  server = null;
  vi.unstubAllEnvs();
});

async function station() {
  const home = tempHome();
  vi.stubEnv('CELLVIGIL_HOME', home);
  const { tokens } = loadTokens(home);
  const feed = new StationFeed();
  feed.add('left', 0);
  feed.add('left', 1);
  // DEMO_RUN: two Li-ion cells in series, floor 5.0 V for the string.
  feed.hub('left/1')!.setRun(DEMO_RUN);
  const asked: Array<[string, StationControlRequest]> = [];
  feed.onControl((key, c) => {
    asked.push([key, c]);
    return { ok: true };
  });
  server = await startLiveServer({ station: feed, listen: '127.0.0.1:0', tokenStore: tokens });
  return { tokens, asked, url: `ws://127.0.0.1:${server.port}/live` };
}

describe('control from the command line', () => {
  it('sends one request to the channel named and returns the answer; the floor is checked before the station is asked', async () => {
    const s = await station();
    const call = (channel: string, request: StationControlRequest) =>
      sendControl({ url: s.url, channel, token: s.tokens.control, request: () => request });
    expect(await call('left/0', { type: 'start', cell_id: 'A-9' })).toEqual({ ok: true });
    expect(await call('left/1', { type: 'set-cutoff', cutoff_V: 4.8 })).toMatchObject({
      ok: false,
      error: expect.stringMatching(/below the safety floor/),
    });
    expect(await call('left/1', { type: 'stop' })).toEqual({ ok: true });
    expect(s.asked).toEqual([
      ['left/0', { type: 'start', cell_id: 'A-9' }],
      ['left/1', { type: 'stop' }],
    ]);
    await expect(call('left/7', { type: 'stop' })).rejects.toThrow(/no such channel/);
    const wrong = sendControl({
      url: s.url,
      channel: 'left/1',
      token: 'f'.repeat(64),
      request: () => ({ type: 'stop' }),
    });
    expect(await wrong).toMatchObject({ ok: false, error: expect.stringMatching(/control token/) });
  });

  it("`control <channel> cutoff <V per cell>` sends the whole string's volts, with this machine's token", async () => {
    const s = await station();
    const out = vi.spyOn(process.stdout, 'write').mockImplementation(() => true);
    try {
      await yargs(['control', 'left/1', 'cutoff', '3.1', '--url', `127.0.0.1:${server!.port}`])
        .command(controlCommand)
        .parseAsync();
    } finally {
      out.mockRestore();
    }
    expect(s.asked).toEqual([['left/1', { type: 'set-cutoff', cutoff_V: 6.2 }]]);
  });
});
