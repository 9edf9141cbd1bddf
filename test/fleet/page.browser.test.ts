/**
 * The fleet page in headless Chromium: two stations on a real Mosquitto, their tiles drawn,
 * a tile opening the channel's live page, which draws the same run. Screenshots land in
 * test-artifacts/.
 */
import { existsSync, mkdirSync } from 'node:fs';
import { chromium, type Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveBroker } from '../../src/fleet/broker-options.js';
import { startFleetLink, type FleetLink } from '../../src/fleet/fleet-link.js';
import { startFleetView, type FleetView } from '../../src/fleet/fleet-view.js';
import { CONTROL_TOKEN, handFedHub, sample, until } from './helpers.js';
import { startBroker, type TestBroker } from './mosquitto.js';

const CHROMIUM = '/usr/bin/chromium';
// In CI the browser must be there (.ci/run installs it); elsewhere a missing one skips.
const skip = !existsSync(CHROMIUM) && !process.env.CI;

describe.skipIf(skip)('fleet page in headless Chromium', () => {
  let browser: Browser;
  let broker: TestBroker;
  let view: FleetView;
  const links: FleetLink[] = [];
  const hubs = [handFedHub('cell-a'), handFedHub('cell-b')];
  const problems: string[] = [];

  beforeAll(async () => {
    mkdirSync('test-artifacts', { recursive: true });
    const accounts = [
      { username: 'bench-a', password: 'a' },
      { username: 'bench-b', password: 'b' },
      { username: 'fleet', password: 'f' },
    ];
    broker = await startBroker(accounts);
    accounts.slice(0, 2).forEach((acc, i) =>
      links.push(
        startFleetLink({
          broker: resolveBroker(
            { url: broker.url, credentialsFile: broker.credentialsFile(acc) },
            acc.username,
          ),
          station: acc.username,
          channels: [{ channel: i, hub: hubs[i]!.hub }],
          controlToken: CONTROL_TOKEN,
          sampleHz: 1000,
        }),
      ),
    );
    view = await startFleetView({
      broker: resolveBroker(
        { url: broker.url, credentialsFile: broker.credentialsFile(accounts[2]!) },
        'fleet',
      ),
      listen: '127.0.0.1:0',
      tokenStore: { control: 'c'.repeat(64), viewer: null },
    });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: [
        '--headless',
        '--no-sandbox',
        '--disable-gpu',
        '--no-first-run',
        '--disable-background-networking',
      ],
    });
  });

  afterAll(async () => {
    await browser?.close();
    await view?.close();
    await Promise.all(links.map((l) => l.close(300)));
    await broker?.stop();
  });

  it('draws a tile per channel and opens the channel page from it', async () => {
    await until('stations online', () => links.every((l) => l.stats().connected) && view.connected);
    for (let t = 1; t <= 40; t++) {
      sample(hubs[0]!.hub, t * 10, 4.1 - t * 0.005);
      sample(hubs[1]!.hub, t * 10, 3.9 - t * 0.004);
    }
    const page = await browser.newPage({ viewport: { width: 420, height: 800 } });
    page.on('pageerror', (e) => problems.push(e.message));
    page.on('console', (m) => m.type() === 'error' && problems.push(m.text()));
    await page.goto(view.url);
    await page.waitForSelector('a.tile >> nth=1', { timeout: 10_000 });
    const tiles = await page.$$eval('a.tile .volts', (els) => els.map((e) => e.textContent));
    // 4.1 − 40 × 0.005 = 3.900 V and 3.9 − 40 × 0.004 = 3.740 V, the last samples sent.
    expect(tiles).toEqual(['3.900 V', '3.740 V']);
    expect(await page.textContent('#summary')).toMatch(/2 of 2 stations online/);
    await page.screenshot({ path: 'test-artifacts/fleet-page.png' });
    await page.click('a.tile >> nth=1');
    await page.waitForURL(/\/channel\?station=bench-b&ch=1/);
    await expect
      .poll(() => page.textContent('#run-title'), { timeout: 10_000 })
      .toContain('cell-b');
    await expect.poll(() => page.textContent('#r-voltage'), { timeout: 10_000 }).toMatch(/^3\.74/);
    await page.screenshot({ path: 'test-artifacts/fleet-channel.png' });
    expect(problems).toEqual([]);
  });
});
