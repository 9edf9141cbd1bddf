import { statSync, writeFileSync, chmodSync, chownSync, mkdirSync, symlinkSync } from 'node:fs';
import { join } from 'node:path';
import { request } from 'node:http';
import { afterEach, describe, expect, it } from 'vitest';
import { hostAllowed, isLoopbackHost, originAllowed, parseListen } from '../../src/live/access.js';
import { LiveHub } from '../../src/live/live-hub.js';
import { startLiveServer, type LiveServer } from '../../src/live/live-server.js';
import { configDir, loadTokens, tokenMatches } from '../../src/live/tokens.js';
import {
  DEMO_RUN,
  scriptedDischarge,
  startRig,
  tempHome,
  Viewer,
  wsUrl,
  type Rig,
} from './helpers.js';

let rig: Rig | null = null;
let extra: LiveServer | null = null;
const viewers: Viewer[] = [];
afterEach(async () => {
  viewers.splice(0).forEach((v) => v.close());
  await rig?.server.close();
  await extra?.close();
  rig = null;
  extra = null;
});

function viewer(url: string, opts = {}): Viewer {
  const v = new Viewer(url, opts);
  viewers.push(v);
  return v;
}

/** The HTTP status a WebSocket upgrade is answered with (101 when accepted). */
async function upgradeStatus(url: string, headers: Record<string, string> = {}): Promise<number> {
  const v = viewer(url, { headers });
  try {
    await v.opened();
    return 101;
  } catch (e) {
    return Number(/HTTP (\d+)/.exec(String(e))?.[1] ?? 0);
  }
}

function rawGet(port: number, path: string, headers: Record<string, string>): Promise<number> {
  return new Promise((resolve, reject) => {
    const req = request({ host: '127.0.0.1', port, path, headers }, (res) => {
      res.resume();
      resolve(res.statusCode ?? 0);
    });
    req.on('error', reject);
    req.end();
  });
}

describe('tokens', () => {
  it('are made on first use (256 random bits each), stored owner-only, and read back unchanged afterwards', () => {
    const home = join(tempHome(), 'nested', 'cellvigil');
    const first = loadTokens(home);
    expect(first.generated).toBe(true);
    expect(first.tokens.control).toMatch(/^[0-9a-f]{64}$/);
    expect(first.tokens.viewer).toMatch(/^[0-9a-f]{64}$/);
    expect(first.tokens.viewer).not.toBe(first.tokens.control);
    expect(statSync(first.path).mode & 0o777).toBe(0o600);
    expect(statSync(home).mode & 0o777).toBe(0o700);
    const again = loadTokens(home);
    expect(again).toEqual({ ...first, generated: false });
  });

  it('refuses a token file other users can read, and an invalid one, with the file named', () => {
    const home = tempHome();
    const { path } = loadTokens(home);
    chmodSync(path, 0o644);
    expect(() => loadTokens(home)).toThrow(
      expect.objectContaining({
        code: 'CV_TOKEN_FILE',
        exitCode: 2,
        message: expect.stringContaining(path),
      }),
    );
    const other = join(tempHome(), 'x');
    mkdirSync(other, { mode: 0o700 });
    writeFileSync(join(other, 'tokens.json'), '{"v":1,"control":"short"}', { mode: 0o600 });
    expect(() => loadTokens(other)).toThrow(expect.objectContaining({ code: 'CV_TOKEN_FILE' }));
  });

  // Common practice of careful daemons (a key another user could have placed is not trusted):
  // the file must be ours, and its folder neither another user's nor writable by others.
  const asRoot = process.getuid?.() === 0;
  const refusedWith = (text: string): unknown =>
    expect.objectContaining({ code: 'CV_TOKEN_FILE', message: expect.stringContaining(text) });

  it.skipIf(!asRoot)('refuses a token file owned by another user, mode 0600 or not', () => {
    const home = tempHome();
    const { path } = loadTokens(home);
    expect(() => loadTokens(home)).not.toThrow();
    chownSync(path, 4321, 4321);
    expect(() => loadTokens(home)).toThrow(refusedWith('belongs to another user (uid 4321)'));
  });

  it.skipIf(!asRoot)('refuses a token folder owned by another user', () => {
    const home = tempHome();
    loadTokens(home);
    chownSync(home, 4321, 4321);
    expect(() => loadTokens(home)).toThrow(refusedWith('folder belongs to another user'));
  });

  it('refuses a token folder others may write to, unless it is sticky and the file is ours', () => {
    const home = tempHome();
    loadTokens(home);
    for (const mode of [0o777, 0o770, 0o703]) {
      chmodSync(home, mode);
      expect(() => loadTokens(home)).toThrow(refusedWith('can be written by other users'));
    }
    // Sticky, as /tmp is: only a file's owner may rename or delete it there.
    chmodSync(home, 0o1777);
    expect(loadTokens(home).generated).toBe(false);
  });

  it.skipIf(!asRoot)('in a sticky folder a file someone else put there is still refused', () => {
    const home = tempHome();
    chmodSync(home, 0o1777);
    writeFileSync(
      join(home, 'tokens.json'),
      JSON.stringify({ v: 1, control: 'a'.repeat(64), viewer: 'b'.repeat(64), created: 'x' }),
      { mode: 0o600 },
    );
    chownSync(join(home, 'tokens.json'), 4321, 4321);
    expect(() => loadTokens(home)).toThrow(refusedWith('belongs to another user'));
  });

  it('makes no tokens in a folder others may write to, and leaves a sticky folder its mode', () => {
    const open = tempHome();
    chmodSync(open, 0o777);
    expect(() => loadTokens(open)).toThrow(refusedWith('can be written by other users'));
    expect(() => statSync(join(open, 'tokens.json'))).toThrow(/ENOENT/);
    const sticky = tempHome();
    chmodSync(sticky, 0o1777);
    const made = loadTokens(sticky);
    expect(made.generated).toBe(true);
    expect(statSync(sticky).mode & 0o7777).toBe(0o1777);
    expect(statSync(made.path).mode & 0o777).toBe(0o600);
  });

  it('refuses a token file that is a link', () => {
    const real = tempHome();
    const { path } = loadTokens(real);
    const home = tempHome();
    symlinkSync(path, join(home, 'tokens.json'));
    expect(() => loadTokens(home)).toThrow(refusedWith('not a regular file'));
  });

  it('live under $CELLVIGIL_HOME, else $XDG_CONFIG_HOME/cellvigil, else ~/.config/cellvigil', () => {
    expect(configDir({ CELLVIGIL_HOME: '/a', XDG_CONFIG_HOME: '/b' })).toBe('/a');
    expect(configDir({ XDG_CONFIG_HOME: '/b' })).toBe('/b/cellvigil');
    expect(configDir({})).toMatch(/\.config\/cellvigil$/);
  });

  it('compare equal only when identical, whatever the lengths', () => {
    const t = 'ab'.repeat(32);
    expect(tokenMatches(t, t)).toBe(true);
    expect(tokenMatches(`${t}0`, t)).toBe(false);
    expect(tokenMatches(t.slice(1), t)).toBe(false);
    expect(tokenMatches('', t)).toBe(false);
    expect(tokenMatches(undefined, t)).toBe(false);
    expect(tokenMatches(t, null)).toBe(false);
  });
});

describe('addresses and origins', () => {
  it('parses listen addresses', () => {
    expect(parseListen('127.0.0.1:8507')).toEqual({ host: '127.0.0.1', port: 8507 });
    expect(parseListen('0.0.0.0:0')).toEqual({ host: '0.0.0.0', port: 0 });
    expect(parseListen('[::1]:9000')).toEqual({ host: '::1', port: 9000 });
    expect(parseListen('127.0.0.1')).toEqual({ host: '127.0.0.1', port: 8507 });
    expect(parseListen(':9001')).toEqual({ host: '127.0.0.1', port: 9001 });
    for (const bad of ['a:b:c', 'host:99999', 'h:-1'])
      expect(() => parseListen(bad)).toThrow(expect.objectContaining({ code: 'CV_USAGE' }));
  });

  it('knows loopback from the rest', () => {
    for (const h of ['127.0.0.1', '127.3.2.1', '::1', '[::1]', 'localhost'])
      expect(isLoopbackHost(h)).toBe(true);
    for (const h of ['0.0.0.0', '::', '192.168.1.20', '10.0.0.1', 'example.org'])
      expect(isLoopbackHost(h)).toBe(false);
  });

  it("allows no Origin, the page's own origin and listed ones; refuses the rest", () => {
    expect(originAllowed(undefined, '127.0.0.1:8507')).toBe(true);
    expect(originAllowed('http://127.0.0.1:8507', '127.0.0.1:8507')).toBe(true);
    expect(originAllowed('http://[::1]:8507', '[::1]:8507')).toBe(true);
    expect(originAllowed('http://127.0.0.1:8508', '127.0.0.1:8507')).toBe(false);
    expect(originAllowed('http://evil.example', '127.0.0.1:8507')).toBe(false);
    expect(originAllowed('null', '127.0.0.1:8507')).toBe(false);
    expect(originAllowed('file://', '127.0.0.1:8507')).toBe(false);
    expect(originAllowed('https://proxy.home', '127.0.0.1:8507', ['https://proxy.home'])).toBe(
      true,
    );
    expect(hostAllowed('evil.example:8507', true)).toBe(false);
    expect(hostAllowed('localhost:8507', true)).toBe(true);
    expect(hostAllowed('192.168.1.20:8507', false)).toBe(true);
  });
});

describe('live server: who may do what', () => {
  it('refuses control without a token or with a wrong one, and nothing changes', async () => {
    rig = await startRig();
    for (const s of scriptedDischarge(20)) rig.hub.sample(s);
    const v = viewer(wsUrl(rig.server));
    await v.until((x) => x.of('hello').length === 1);
    const before = JSON.stringify(rig.hub.hello());
    v.send({ type: 'stop', v: 1, id: 'a' });
    v.send({ type: 'stop', v: 1, id: 'b', token: 'not-the-token' });
    v.send({ type: 'set-cutoff', v: 1, id: 'c', token: rig.tokens.viewer, cutoff_V: 7 });
    v.send({ type: 'mark', v: 1, id: 'd', token: rig.tokens.control.slice(0, 63), note: 'x' });
    await v.until((x) => x.of('error').length === 4);
    expect(v.of('error').map((e) => [e.id, e.code])).toEqual([
      ['a', 'malformed'],
      ['b', 'unauthorized'],
      ['c', 'unauthorized'],
      ['d', 'unauthorized'],
    ]);
    expect(rig.accepted).toEqual([]);
    expect(JSON.stringify(rig.hub.hello())).toBe(before);
    expect(v.of('ack')).toEqual([]);
  });

  it('carries out control with the control token, loopback included, and refuses a cutoff below the floor', async () => {
    rig = await startRig();
    const v = viewer(wsUrl(rig.server));
    const other = viewer(wsUrl(rig.server));
    await Promise.all([v, other].map((x) => x.until((y) => y.of('hello').length === 1)));
    const token = rig.tokens.control;
    v.send({ type: 'set-cutoff', v: 1, id: 'low', token, cutoff_V: DEMO_RUN.floor_V - 0.01 });
    v.send({ type: 'set-cutoff', v: 1, id: 'ok', token, cutoff_V: 6.3 });
    v.send({ type: 'mark', v: 1, id: 'm', token, note: 'lid opened' });
    v.send({ type: 'stop', v: 1, id: 's', token });
    await v.until((x) => x.of('ack').length === 3 && x.of('error').length === 1);
    expect(v.of('error')[0]).toMatchObject({
      id: 'low',
      code: 'refused',
      error: expect.stringContaining('floor'),
    });
    expect(v.of('ack').map((a) => [a.id, a.request])).toEqual([
      ['ok', 'set-cutoff'],
      ['m', 'mark'],
      ['s', 'stop'],
    ]);
    expect(rig.accepted).toEqual([
      { type: 'set-cutoff', cutoff_V: 6.3 },
      { type: 'mark', note: 'lid opened' },
      { type: 'stop' },
    ]);
    // Other viewers see the effects, not the replies.
    await other.until((x) => x.of('cutoff').length === 1 && x.of('mark').length === 1);
    expect(other.of('cutoff')[0]!.cutoff_V).toBe(6.3);
    expect(other.of('ack')).toEqual([]);
  });

  it('logs refusals, but no more than 30 a minute, so hammering the port cannot grow the event log', async () => {
    const events: string[] = [];
    rig = await startRig({ log: (e) => events.push(e.event) });
    const v = viewer(wsUrl(rig.server));
    await v.until((x) => x.of('hello').length === 1);
    for (let i = 0; i < 200; i++) v.send({ type: 'stop', v: 1, token: `guess-${i}` });
    v.send({ type: 'mark', v: 1, token: rig.tokens.control, note: 'still logged' });
    await v.until((x) => x.of('error').length === 200 && x.of('ack').length === 1);
    expect(events.filter((e) => e === 'live_control').length).toBe(30);
    expect(events.length).toBeLessThanOrEqual(31);
    expect(rig.accepted).toEqual([{ type: 'mark', note: 'still logged' }]);
  });

  it('refuses a WebSocket from a foreign page, and requests naming a foreign host (DNS rebinding)', async () => {
    rig = await startRig();
    const url = wsUrl(rig.server);
    const port = rig.server.port;
    expect(await upgradeStatus(url, { Origin: 'http://evil.example' })).toBe(403);
    expect(await upgradeStatus(url, { Origin: `http://127.0.0.1:${port + 1}` })).toBe(403);
    expect(await upgradeStatus(url, { Origin: `http://127.0.0.1:${port}` })).toBe(101);
    expect(await upgradeStatus(url)).toBe(101);
    expect(
      await upgradeStatus(url, {
        Host: `rebound.example:${port}`,
        Origin: `http://rebound.example:${port}`,
      }),
    ).toBe(403);
    expect(await rawGet(port, '/api/state', { Host: `rebound.example:${port}` })).toBe(403);
    expect(await upgradeStatus(url.replace('/live', '/other'))).toBe(404);
  });

  it('refuses to start beyond loopback without a viewer token', async () => {
    const hub = new LiveHub();
    const { tokens } = loadTokens(tempHome());
    await expect(
      startLiveServer({
        hub,
        listen: '0.0.0.0:0',
        tokenStore: { control: tokens.control, viewer: null },
      }),
    ).rejects.toMatchObject({
      code: 'CV_LIVE_UNPROTECTED',
      exitCode: 2,
      message: expect.stringMatching(/viewer token.*--listen 0\.0\.0\.0:0/s),
    });
  });

  it('beyond loopback, wants the viewer (or control) token for the page, the snapshot and the feed, not for the static assets', async () => {
    const hub = new LiveHub();
    hub.setRun(DEMO_RUN);
    const { tokens } = loadTokens(tempHome());
    extra = await startLiveServer({ hub, listen: '0.0.0.0:0', tokenStore: tokens });
    const base = `http://127.0.0.1:${extra.port}`;
    expect(extra.url).toBe(`${base}/`);
    expect((await fetch(`${base}/`)).status).toBe(401);
    expect((await fetch(`${base}/api/state?token=wrong`)).status).toBe(401);
    expect((await fetch(`${base}/?token=${tokens.viewer}`)).status).toBe(200);
    expect(
      (await fetch(`${base}/api/state`, { headers: { Authorization: `Bearer ${tokens.viewer}` } }))
        .status,
    ).toBe(200);
    expect((await fetch(`${base}/api/state?token=${tokens.control}`)).status).toBe(200);
    expect((await fetch(`${base}/assets/uplot.js`)).status).toBe(200);
    const ws = `ws://127.0.0.1:${extra.port}/live`;
    expect(await upgradeStatus(ws)).toBe(401);
    expect(await upgradeStatus(`${ws}?token=${tokens.viewer}`)).toBe(101);
    expect(await upgradeStatus(ws, { Authorization: `Bearer ${tokens.viewer}` })).toBe(101);
  });

  it('refuses malformed, unknown and binary messages with an error, and closes on an oversized one, without harm', async () => {
    rig = await startRig();
    const v = viewer(wsUrl(rig.server));
    const bystander = viewer(wsUrl(rig.server));
    await Promise.all([v, bystander].map((x) => x.until((y) => y.of('hello').length === 1)));
    const before = JSON.stringify(rig.hub.hello());
    v.send('{not json');
    v.send('[1,2]');
    v.send({ type: 'reboot', v: 1, token: rig.tokens.control });
    v.send({ type: 'stop', v: 9, token: rig.tokens.control });
    v.send({ type: 'set-cutoff', v: 1, token: rig.tokens.control, cutoff_V: 'low' });
    v.ws.send(Buffer.from([1, 2, 3]), { binary: true });
    await v.until((x) => x.of('error').length === 6);
    expect(v.of('error').every((e) => e.code === 'malformed')).toBe(true);
    expect(v.of('error')[2]!.error).toMatch(/unknown message type "reboot"/);
    // Past 4 KiB the message is not read at all: the connection ends with 1009 (message too big).
    v.send({ type: 'mark', v: 1, token: rig.tokens.control, note: 'x'.repeat(5000) });
    await v.until((x) => x.closed !== null);
    expect(v.closed?.code).toBe(1009);
    expect(rig.accepted).toEqual([]);
    expect(JSON.stringify(rig.hub.hello())).toBe(before);
    // The daemon and the other viewer carry on.
    rig.hub.sample([...scriptedDischarge(1)][0]!);
    await bystander.until((x) => x.of('sample').length === 1);
    expect(bystander.closed).toBeNull();
  });
});
