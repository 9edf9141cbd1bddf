/**
 * The broker killed (SIGKILL) and restarted in the middle of a real run: the daemon on the
 * simulated rig keeps measuring and logging, the station's link reconnects with backoff and
 * republishes its retained statuses, the fleet view re-subscribes and catches up, and the
 * result reaches it equal to the run folder's result.json. The station's hub is fed from the
 * daemon's own live feed, as the daemon's hub would be. A broker that keeps no persistence
 * loses its retained messages on restart (Mosquitto `persistence false`); the station's
 * republishing is what brings them back.
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { WebSocket } from 'ws';
import { resolveBroker } from '../../src/fleet/broker-options.js';
import { startFleetLink } from '../../src/fleet/fleet-link.js';
import { startFleetView } from '../../src/fleet/fleet-view.js';
import type { FleetResult } from '../../src/fleet/payloads.js';
import { LiveHub } from '../../src/live/live-hub.js';
import type { ServerMessage } from '../../src/live/live-types.js';
import { JsonSocket, until } from './helpers.js';
import { startBroker, type TestBroker } from './mosquitto.js';

const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));

/** Feeds a hub from a daemon's /live socket, message by message. */
function relay(url: string, hub: LiveHub): WebSocket {
  const ws = new WebSocket(url);
  ws.on('message', (d) => {
    const m = JSON.parse(d.toString()) as ServerMessage;
    if (m.type === 'hello') {
      if (m.run) hub.setRun(m.run);
      if (m.status.sample) hub.sample(m.status.sample);
    } else if (m.type === 'sample') {
      const { type: _t, v: _v, time_to_cutoff_s: _c, ...s } = m;
      hub.sample(s);
    } else if (m.type === 'state')
      hub.state({ host_s: m.host_s, from: m.from, to: m.to, why: m.why });
    else if (m.type === 'alarm') hub.alarm({ host_s: m.host_s, kind: m.kind, detail: m.detail });
    else if (m.type === 'cutoff') hub.cutoffChanged(m.cutoff_V);
    else if (m.type === 'result') hub.result(m.result);
  });
  return ws;
}

let broker: TestBroker | undefined;
afterAll(async () => broker?.stop());

describe('the broker going away mid-run', () => {
  it('touches nothing in the run folder, and the fleet view catches up after it returns', async () => {
    expect(existsSync(CLI), 'build first: npm run build').toBe(true);
    broker = await startBroker([
      { username: 'bench-r', password: 'r-pass' },
      { username: 'fleet', password: 'f-pass' },
    ]);
    const home = mkdtempSync(join(tmpdir(), 'cv-fleet-'));
    const runs = join(home, 'runs');
    const daemon = spawn(
      process.execPath,
      [
        CLI,
        'run',
        '--sim',
        'quick',
        '--speed',
        '5',
        '--listen',
        '127.0.0.1:0',
        '--once',
        '--runs',
        runs,
      ],
      { env: { ...process.env, CELLVIGIL_HOME: home }, stdio: ['ignore', 'pipe', 'pipe'] },
    );
    let out = '';
    daemon.stdout!.on('data', (d: Buffer) => (out += d.toString()));
    daemon.stderr!.on('data', (d: Buffer) => (out += d.toString()));
    const exit = new Promise<number | null>((r) => daemon.once('exit', (c) => r(c)));
    const liveUrl = await until(
      'live address',
      () => /^live: (http:\/\/\S+\/)$/m.exec(out)?.[1],
      20_000,
    );

    const hub = new LiveHub();
    const feed = relay(`${liveUrl.replace('http', 'ws')}live`, hub);
    const creds = (u: string, p: string) => broker!.credentialsFile({ username: u, password: p });
    const link = startFleetLink({
      broker: resolveBroker(
        { url: broker.url, credentialsFile: creds('bench-r', 'r-pass') },
        'cv-r',
      ),
      station: 'bench-r',
      channels: [{ channel: 0, hub }],
      controlToken: null,
      statusEveryMs: 500,
      backoffMinMs: 100,
      backoffMaxMs: 400,
    });
    const filed: FleetResult[] = [];
    const view = await startFleetView({
      broker: resolveBroker(
        { url: broker.url, credentialsFile: creds('fleet', 'f-pass') },
        'cv-fleet',
      ),
      listen: '127.0.0.1:0',
      tokenStore: { control: 'c'.repeat(64), viewer: null },
      fileResult: (r) => filed.push(r),
      backoffMinMs: 100,
      backoffMaxMs: 400,
    });
    const page = new JsonSocket(`${view.url.replace('http', 'ws')}fleet`);
    await page.open;
    const tiles = () => page.of('tile').filter((t) => t['key'] === 'bench-r/0');
    await until(
      'samples on the fleet page',
      () => tiles().filter((t) => t['made_ms'] !== null).length >= 3,
      20_000,
    );

    await broker.kill();
    await until('link sees the broker gone', () => !link.stats().connected);
    await new Promise((r) => setTimeout(r, 1500));
    const droppedWhileAway = link.stats().samplesDropped;
    const restartedAt = Date.now();
    await broker.start();
    await until('link back', () => link.stats().connected, 10_000);
    await until('fleet view back', () => view.connected, 10_000);
    await until(
      'fresh samples after the restart',
      () => tiles().some((t) => Number(t['made_ms']) > restartedAt),
      10_000,
    );

    expect(await exit).toBe(0);
    await until('result on the fleet page', () => tiles().some((t) => t['ended'] === true), 10_000);
    const folder = join(runs, readdirSync(runs)[0]!);
    const onDisk = JSON.parse(readFileSync(join(folder, 'result.json'), 'utf8')) as Record<
      string,
      unknown
    >;
    // The run itself never knew: a discharge to its cutoff with no frame lost and no gap.
    expect(onDisk).toMatchObject({ end_reason: 'cutoff', frames_lost: 0, gaps: 0 });
    await until('result filed', () => filed.length === 1);
    expect(filed[0]!.result).toEqual(onDisk);
    expect(filed[0]!.run_id).toBe(readdirSync(runs)[0]);
    expect(droppedWhileAway).toBeGreaterThan(0);
    expect(link.stats().drops).toBeGreaterThanOrEqual(1);

    page.close();
    feed.close();
    await link.close(500);
    await view.close();
  }, 90_000);
});
