import { afterEach, describe, expect, it, vi } from 'vitest';
import yargs from 'yargs';
import { watchCommand } from '../../src/cli/commands/watch.js';
import { watchLive } from '../../src/live/watch-client.js';
import {
  applyMessage,
  emptyView,
  exitCodeForResult,
  liveSocketUrl,
  statusBlock,
  statusLine,
} from '../../src/live/watch-view.js';
import { LiveHub } from '../../src/live/live-hub.js';
import { startLiveServer } from '../../src/live/live-server.js';
import { loadTokens } from '../../src/live/tokens.js';
import type { ServerMessage } from '../../src/live/live-types.js';
import { DEMO_RUN, paced, scriptedDischarge, startRig, tempHome, type Rig } from './helpers.js';

let rig: Rig | null = null;
afterEach(async () => {
  await rig?.server.close();
  rig = null;
  process.exitCode = undefined;
});

describe('watch: pure parts', () => {
  it('derives the WebSocket address from what a person types', () => {
    expect(liveSocketUrl('http://192.168.1.20:8507/')).toBe('ws://192.168.1.20:8507/live');
    expect(liveSocketUrl('https://rig.lan/')).toBe('wss://rig.lan/live');
    expect(liveSocketUrl('127.0.0.1:8507')).toBe('ws://127.0.0.1:8507/live');
    expect(liveSocketUrl('ws://h:1/live')).toBe('ws://h:1/live');
    expect(liveSocketUrl('http://h:1/?token=abc')).toBe('ws://h:1/live?token=abc');
    expect(liveSocketUrl('http://h:1/', 'xyz')).toBe('ws://h:1/live?token=xyz');
    expect(() => liveSocketUrl('ftp://h/')).toThrow(expect.objectContaining({ code: 'CV_USAGE' }));
  });

  it("maps the end reason to the run's exit code (exit codes of the README: 0 normal, 3 safety limit, 2 refused, 1 a rig that never sent a frame)", () => {
    expect(exitCodeForResult({ end_reason: 'cutoff' })).toBe(0);
    expect(exitCodeForResult({ end_reason: 'stopped' })).toBe(0);
    expect(exitCodeForResult({ end_reason: 'over_temperature' })).toBe(3);
    expect(exitCodeForResult({ end_reason: 'link_lost' })).toBe(3);
    expect(exitCodeForResult({ end_reason: 'fault' })).toBe(3);
    expect(
      exitCodeForResult({
        end_reason: 'refused',
        end_detail: "resting voltage above the chemistry's highest",
        frames_accepted: 12,
      }),
    ).toBe(2);
    expect(
      exitCodeForResult({
        end_reason: 'refused',
        end_detail: 'rig_silent: no frame in 5 s',
        frames_accepted: 0,
      }),
    ).toBe(1);
    expect(exitCodeForResult({ end_reason: 'exploded' })).toBe(1);
    expect(exitCodeForResult({})).toBe(1);
  });

  it('shows V, A, mAh, Wh, °C, state, elapsed, time to cutoff and the last alarms', () => {
    const hub = new LiveHub();
    const view = emptyView();
    hub.subscribe((m) => applyMessage(view, m));
    hub.setRun(DEMO_RUN);
    // 1.9 A for 3600 s is 1900 mAh (charge = ∫ I dt, physics); the script sums it sample by sample.
    for (const s of scriptedDischarge(3601)) hub.sample(s);
    for (let i = 0; i < 5; i++) hub.alarm({ host_s: 3600, kind: `k${i}`, detail: 'd' });
    const block = statusBlock(view).join('\n');
    expect(block).toMatch(/shed-pack-b · 2 × li-ion/);
    expect(block).toMatch(/\d\.\d{3} V {2}1\.900 A {2}1900 mAh {2}\d+\.\d\d Wh {2}30\.0 °C/);
    expect(block).toMatch(
      /state discharging {2}elapsed 1:00:00 {2}cutoff 6\.000 V {2}to cutoff \d+:\d\d:\d\d/,
    );
    expect(block.match(/^! /gm)).toHaveLength(3);
    expect(block).toMatch(/k4: d/);
    expect(statusLine(view)).toMatch(/^1:00:00 {2}discharging .* last alarm k4$/);
  });
});

describe('watch: against a live server', () => {
  it('follows a run, comes back after a daemon restart on the same port, and sees the result', async () => {
    rig = await startRig();
    const port = rig.server.port;
    const got: ServerMessage[] = [];
    const links: string[] = [];
    const client = watchLive({
      url: `ws://127.0.0.1:${port}/live`,
      onMessage: (m) => got.push(m),
      onLink: (t) => links.push(t),
      backoffMinMs: 50,
      backoffMaxMs: 200,
    });
    await vi.waitFor(() => expect(got.filter((m) => m.type === 'hello')).toHaveLength(1));
    await rig.server.close();
    await vi.waitFor(() => expect(links.some((l) => /retrying/.test(l))).toBe(true));

    const hub = new LiveHub();
    hub.setRun({ ...DEMO_RUN, label: 'after-restart' });
    const again = await startLiveServer({
      hub,
      listen: `127.0.0.1:${port}`,
      tokenStore: rig.tokens,
    });
    rig = { ...rig, server: again, hub };
    await vi.waitFor(() => expect(got.filter((m) => m.type === 'hello')).toHaveLength(2), {
      timeout: 5000,
    });
    hub.result({ end_reason: 'over_temperature' });
    await vi.waitFor(() => expect(got.at(-1)?.type).toBe('result'));
    client.stop();
    await client.done;
  });

  it('gives up on an address that never answers, with a clear error (TCP: a closed port refuses the connection)', async () => {
    // A port that was just listening and is closed now: nothing answers there.
    const hub = new LiveHub();
    const { tokens } = loadTokens(tempHome());
    const gone = await startLiveServer({ hub, listen: '127.0.0.1:0', tokenStore: tokens });
    const port = gone.port;
    await gone.close();
    const links: string[] = [];
    const started = Date.now();
    const client = watchLive({
      url: `ws://127.0.0.1:${port}/live?token=secret`,
      onMessage: () => {},
      onLink: (t) => links.push(t),
      backoffMinMs: 50,
      backoffMaxMs: 100,
      firstConnectMs: 600,
    });
    await expect(client.done).rejects.toMatchObject({
      code: 'CV_WATCH_UNREACHABLE',
      exitCode: 1,
      message: expect.stringContaining('nothing listens there (connection refused)'),
    });
    const err = await client.done.catch((e: Error) => e);
    expect((err as Error).message).toContain('token=…');
    expect((err as Error).message).not.toContain('secret');
    expect(Date.now() - started).toBeLessThan(3000);
    expect(links.filter((l) => /retrying/.test(l)).length).toBeGreaterThan(1);
  });

  it('keeps retrying past the first-connection limit once it has been connected', async () => {
    rig = await startRig();
    const port = rig.server.port;
    const got: ServerMessage[] = [];
    const client = watchLive({
      url: `ws://127.0.0.1:${port}/live`,
      onMessage: (m) => got.push(m),
      onLink: () => {},
      backoffMinMs: 50,
      backoffMaxMs: 100,
      firstConnectMs: 300,
    });
    await vi.waitFor(() => expect(got.filter((m) => m.type === 'hello')).toHaveLength(1));
    await rig.server.close();
    let settled = false;
    client.done.then(
      () => (settled = true),
      () => (settled = true),
    );
    await new Promise((r) => setTimeout(r, 900));
    expect(settled).toBe(false);
    client.stop();
    await client.done;
  });

  it('stops with a clear error when the daemon refuses the viewer token', async () => {
    const hub = new LiveHub();
    const { tokens } = loadTokens(tempHome());
    const server = await startLiveServer({ hub, listen: '0.0.0.0:0', tokenStore: tokens });
    try {
      const client = watchLive({
        url: `ws://127.0.0.1:${server.port}/live?token=wrong`,
        onMessage: () => {},
        onLink: () => {},
      });
      await expect(client.done).rejects.toMatchObject({
        code: 'CV_WATCH_REFUSED',
        exitCode: 2,
        message: expect.stringContaining('401'),
      });
    } finally {
      await server.close();
    }
  });

  it("the watch command prints one line per update when not on a terminal and exits with the run's code", async () => {
    rig = await startRig();
    const lines: string[] = [];
    const spy = vi
      .spyOn(process.stdout, 'write')
      .mockImplementation((chunk: string | Uint8Array) => {
        lines.push(String(chunk));
        return true;
      });
    try {
      const run = yargs(['watch', rig.server.url, '--interval', '0'])
        .command(watchCommand)
        .strict()
        .parseAsync();
      await vi.waitFor(() => expect(rig!.server.viewers()).toHaveLength(1));
      await paced(rig.hub, scriptedDischarge(5));
      rig.hub.alarm({
        host_s: 4,
        kind: 'over_temperature',
        detail: '61.0 °C is above the limit of 60 °C',
      });
      rig.hub.result({ end_reason: 'over_temperature', capacity_Ah: 0.002 });
      await run;
    } finally {
      spy.mockRestore();
    }
    const text = lines.join('');
    expect(text).not.toContain(`${String.fromCharCode(27)}[`);
    expect(text.trim().split('\n').length).toBeGreaterThanOrEqual(7);
    expect(text).toMatch(/last alarm over_temperature/);
    expect(text).toMatch(/ended: over_temperature {2}2 mAh/);
    expect(process.exitCode).toBe(3);
  });
});
