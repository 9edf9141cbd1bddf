import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { checkServerMessage } from '../../src/live/message-schemas.js';
import {
  DEMO_RUN,
  paced,
  scriptedDischarge,
  startRig,
  Viewer,
  wsUrl,
  type Rig,
} from './helpers.js';

let rig: Rig | null = null;
const viewers: Viewer[] = [];
afterEach(async () => {
  viewers.splice(0).forEach((v) => v.close());
  await rig?.server.close();
  rig = null;
});

function viewer(url: string, opts = {}): Viewer {
  const v = new Viewer(url, opts);
  viewers.push(v);
  return v;
}

describe('live server: the stream', () => {
  it('sends hello with the run so far, then samples, state changes, alarms, the cutoff and the result, all schema-valid', async () => {
    rig = await startRig();
    const script = [...scriptedDischarge(1000)];
    for (const s of script.slice(0, 600)) rig.hub.sample(s);
    const v = viewer(wsUrl(rig.server));
    await v.until((x) => x.of('hello').length === 1);
    const hello = v.of('hello')[0]!;
    expect(hello.run).toEqual(DEMO_RUN);
    expect(hello.status.sample?.host_s).toBe(599);
    expect(hello.history.points.length).toBeLessThanOrEqual(201);
    expect(hello.history.points.at(-1)![0]).toBe(599);

    for (const s of script.slice(600)) rig.hub.sample(s);
    rig.hub.state({ host_s: 999, from: 'discharging', to: 'stopping', why: 'cutoff reached' });
    rig.hub.alarm({
      host_s: 999,
      kind: 'over_temperature',
      detail: '61.0 °C is above the limit of 60 °C',
    });
    rig.hub.cutoffChanged(6.1);
    rig.hub.result({ end_reason: 'cutoff', capacity_Ah: 0.527, energy_Wh: 3.9, duration_s: 999 });
    await v.until((x) => x.of('result').length === 1);

    // A burst in one turn reaches the viewer as its newest sample, before what followed it.
    const samples = v.of('sample').map((s) => s.host_s);
    expect(samples.at(-1)).toBe(999);
    expect(samples.length).toBeLessThan(10);
    expect(v.messages.slice(-5).map((m) => m.type)).toEqual([
      'sample',
      'state',
      'alarm',
      'cutoff',
      'result',
    ]);
    for (const m of v.messages) expect(checkServerMessage(m)).toMatchObject({ ok: true });
  });

  it("a viewer that keeps up gets every sample that comes at a rig's pace, in order", async () => {
    rig = await startRig();
    const v = viewer(wsUrl(rig.server));
    await v.until((x) => x.of('hello').length === 1);
    const script = [...scriptedDischarge(40)];
    await paced(rig.hub, script);
    await v.until((x) => x.of('sample').length === script.length);
    expect(v.of('sample').map((s) => s.host_s)).toEqual(script.map((s) => s.host_s));
  });

  it('serves twenty viewers at once, each with the full stream', async () => {
    rig = await startRig();
    const many = Array.from({ length: 20 }, () => viewer(wsUrl(rig!.server)));
    await Promise.all(many.map((v) => v.until((x) => x.of('hello').length === 1)));
    expect(rig.server.viewers()).toHaveLength(20);
    await paced(rig.hub, scriptedDischarge(30));
    rig.hub.result({ end_reason: 'stopped' });
    await Promise.all(many.map((v) => v.until((x) => x.of('result').length === 1)));
    for (const v of many) expect(v.of('sample')).toHaveLength(30);
  });

  it('GET /api/state answers the same snapshot as hello; the page and the bundled chart library are served', async () => {
    rig = await startRig();
    for (const s of scriptedDischarge(50)) rig.hub.sample(s);
    const state = (await (await fetch(`${rig.server.url}api/state`)).json()) as unknown;
    expect(checkServerMessage(state)).toMatchObject({ ok: true });
    expect(state).toEqual(JSON.parse(JSON.stringify(rig.hub.hello())));

    const page = await fetch(rig.server.url);
    expect(page.status).toBe(200);
    expect(page.headers.get('content-type')).toMatch(/text\/html/);
    expect(page.headers.get('content-security-policy')).toMatch(/script-src 'self'/);
    const html = await page.text();
    // Offline page: nothing is loaded from another host.
    expect(html).not.toMatch(/(src|href)="(https?:)?\/\//);

    const uplotDist = join(
      dirname(createRequire(import.meta.url).resolve('uplot/package.json')),
      'dist',
    );
    const js = Buffer.from(await (await fetch(`${rig.server.url}assets/uplot.js`)).arrayBuffer());
    expect(js.equals(readFileSync(join(uplotDist, 'uPlot.iife.min.js')))).toBe(true);
    expect((await fetch(`${rig.server.url}assets/uplot.css`)).status).toBe(200);
    expect((await fetch(`${rig.server.url}assets/live.js`)).status).toBe(200);
    expect((await fetch(`${rig.server.url}nothing-here`)).status).toBe(404);
    expect((await fetch(rig.server.url, { method: 'POST' })).status).toBe(405);
  });

  it('close() ends every viewer and frees the port', async () => {
    rig = await startRig();
    const v = viewer(wsUrl(rig.server));
    await v.until((x) => x.of('hello').length === 1);
    await rig.server.close();
    await v.until((x) => x.closed !== null);
    expect(v.closed?.code).toBe(1001);
    await expect(fetch(rig.server.url)).rejects.toThrow();
    rig = null;
  });
});
