import { existsSync, mkdirSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { chromium, type Browser } from 'playwright-core';
import { startLiveServer, type LiveServer } from '../../src/live/live-server.js';
import { StationFeed } from '../../src/live/station-feed.js';
import { loadTokens } from '../../src/live/tokens.js';
import { DEMO_RUN, scriptedDischarge, tempHome } from './helpers.js';

const CHROMIUM = '/usr/bin/chromium';
// In CI the browser must be there (.ci/run installs it); elsewhere a missing one skips.
const skip = !existsSync(CHROMIUM) && !process.env.CI;

describe.skipIf(skip)('station overview in headless Chromium', () => {
  let browser: Browser;
  let server: LiveServer;
  let feed: StationFeed;

  beforeAll(async () => {
    mkdirSync('test-artifacts', { recursive: true });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--no-first-run'],
    });
    // Two rigs of four channels (our own demo), every state a tile can show.
    feed = new StationFeed({ historyPoints: 100 });
    for (const rig of ['left', 'right'])
      for (let ch = 0; ch < 4; ch++) feed.add(rig, ch, `${rig[0]!.toUpperCase()}-${ch}`);
    const keys = feed.keys();
    keys.slice(0, 7).forEach((k) => feed.hub(k)!.setRun({ ...DEMO_RUN, label: `run of ${k}` }));
    for (const s of scriptedDischarge(5)) for (const k of keys.slice(0, 7)) feed.hub(k)!.sample(s);
    feed.hub('left/1')!.result({ end_reason: 'cutoff', capacity_Ah: 2.512 });
    feed.hub('left/3')!.alarm({ host_s: 4, kind: 'over_temperature', detail: '60.4 °C' });
    feed.hub('left/3')!.result({ end_reason: 'over_temperature', capacity_Ah: 0.9 });
    const { tokens } = loadTokens(tempHome());
    server = await startLiveServer({
      station: feed,
      listen: '127.0.0.1:0',
      tokenStore: tokens,
      overviewMs: 100,
    });
  });

  afterAll(async () => {
    await browser?.close();
    await server?.close();
  });

  it("shows a tile per channel in rig and channel order, fits a phone, and a tile opens that channel's page", async () => {
    const problems: string[] = [];
    // A phone of the common 390 px width (common practice for a mobile layout check).
    const page = await browser.newPage({ viewport: { width: 390, height: 844 } });
    page.on('pageerror', (e) => problems.push(e.message));
    await page.goto(server.url);
    await expect.poll(() => page.locator('.st-tile').count()).toBe(8);
    const names = await page.locator('.st-rig h2').allTextContents();
    expect(names).toEqual(['left', 'right']);
    const cells = await page.locator('.st-cell').allTextContents();
    expect(cells.map((c) => c.split(' ')[0])).toEqual([
      'L-0',
      'L-1',
      'L-2',
      'L-3',
      'R-0',
      'R-1',
      'R-2',
      'R-3',
    ]);
    await expect
      .poll(() => page.locator('.st-tile').nth(1).getAttribute('data-level'))
      .toBe('done');
    expect(await page.locator('.st-tile').nth(3).getAttribute('data-level')).toBe('alarm');
    expect(await page.locator('.st-tile').nth(7).getAttribute('data-level')).toBe('idle');
    expect(await page.locator('.st-tile').nth(1).textContent()).toContain('2512');
    // Nothing wider than the screen.
    const overflow = await page.evaluate<number>('document.documentElement.scrollWidth');
    expect(overflow).toBeLessThanOrEqual(390);
    await page.screenshot({ path: 'test-artifacts/station-overview-390.png', fullPage: true });
    await page.locator('.st-tile').nth(2).click();
    await expect.poll(() => page.textContent('#run-title')).toContain('run of left/2');
    expect(page.url()).toContain('channel=left%2F2');
    expect(problems).toEqual([]);
  });
});
