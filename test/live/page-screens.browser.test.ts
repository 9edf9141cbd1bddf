/**
 * The live page read as a person reads it, at a phone's width (390 CSS px, a common handset) and
 * a desktop's (1280 px): no label cut or running out of its box, time ticks that never read
 * alike, and notices at three levels each with its own look. Screenshots go to test-artifacts/.
 */
import { existsSync, mkdirSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { runInNewContext } from 'node:vm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { chromium, type Browser, type Page } from 'playwright-core';
import { LiveHub } from '../../src/live/live-hub.js';
import { scriptedDischarge, startRig, type Rig } from './helpers.js';
import { overflowing } from './overflow.js';

const CHROMIUM = '/usr/bin/chromium';
const TIME_AXIS = fileURLToPath(new URL('../../src/live/page/time-axis.js', import.meta.url));
const skip = !existsSync(CHROMIUM) && !process.env.CI;

const TEXT_BOXES =
  '.tile-value, .tile-label, .banner strong, .banner > span, .log li, .facts dd, .facts dt, .run-title, figcaption, .hint, .control-reply';

describe('time axis labels (pure)', () => {
  it('never repeat, whatever step uPlot picks for a run of 30 s to 30 h', () => {
    // The page's own script, run as the browser runs it (it sets a global).
    const sandbox: {
      cvTimeAxis?: { STEPS: number[]; labels: (s: number[]) => string[] };
    } = {};
    runInNewContext(readFileSync(TIME_AXIS, 'utf8'), sandbox);
    const axis = sandbox.cvTimeAxis!;
    // The old labels: 20 s ticks all rounded to whole minutes ("0m 0m 1m 1m").
    expect(axis.labels([0, 20, 40, 60])).toEqual(['0:00', '0:20', '0:40', '1:00']);
    expect(axis.labels([3600, 5400, 7200])).toEqual(['1h00', '1h30', '2h00']);
    for (const span of [30, 100, 600, 5400, 7200, 108_000]) {
      for (const step of axis.STEPS.filter((s) => s >= span / 12 && s <= span)) {
        const splits: number[] = [];
        for (let t = 0; t <= span; t += step) splits.push(t);
        const labels = axis.labels(splits);
        expect(new Set(labels).size, `${span} s in steps of ${step} s: ${labels.join(' ')}`).toBe(
          labels.length,
        );
      }
    }
  });
});

describe.skipIf(skip)('live page at phone and desktop widths', () => {
  let browser: Browser;
  let rig: Rig;

  beforeAll(async () => {
    mkdirSync('test-artifacts', { recursive: true });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--no-first-run'],
    });
    rig = await startRig({}, new LiveHub({ historyPoints: 400 }));
    rig.hub.state({ host_s: 0, from: 'starting', to: 'discharging', why: 'load confirmed on' });
    for (const s of scriptedDischarge(1500, 4)) rig.hub.sample(s);
  });

  afterAll(async () => {
    await browser?.close();
    await rig?.server.close();
  });

  async function open(width: number, height: number): Promise<Page> {
    const page = await browser.newPage({ viewport: { width, height } });
    await page.goto(rig.server.url);
    await expect.poll(() => page.textContent('#state')).toBe('discharging');
    await page.waitForSelector('#chart-voltage canvas');
    return page;
  }

  const bannerColour = (page: Page): Promise<string> =>
    page.evaluate<string>(
      `getComputedStyle(document.getElementById('alarm-banner')).borderTopColor`,
    );

  it('keeps an information notice calm, an alarm red, and never lets the lesser hide the greater', async () => {
    const page = await open(1280, 900);
    rig.hub.alarm({
      host_s: 100,
      kind: 'clock_warning',
      detail: "the rig's clock is off by 2.1 %; frames are timed by the host",
    });
    await page.waitForSelector('#alarm-banner:not([hidden])');
    await expect(page.getAttribute('#alarm-banner', 'data-level')).resolves.toBe('info');
    await expect(page.textContent('#alarm-title')).resolves.toBe("Note: rig's clock");
    const infoColour = await bannerColour(page);

    rig.hub.alarm({ host_s: 120, kind: 'link_down', detail: "the rig's port went away" });
    await expect.poll(() => page.getAttribute('#alarm-banner', 'data-level')).toBe('warning');
    const warnColour = await bannerColour(page);

    rig.hub.alarm({
      host_s: 5990,
      kind: 'over_temperature',
      detail: 'over_temperature: 60.4 °C is above the limit of 60 °C',
    });
    await expect.poll(() => page.getAttribute('#alarm-banner', 'data-level')).toBe('alarm');
    const alarmColour = await bannerColour(page);
    expect(new Set([infoColour, warnColour, alarmColour]).size).toBe(3);
    await expect(page.textContent('#alarm-title')).resolves.toBe('Alarm: over temperature');
    const text = (await page.textContent('#alarm-text')) ?? '';
    expect(text).toBe('60.4 °C is above the limit of 60 °C (at 1:39:50)');

    // A later note goes to the list but leaves the alarm standing.
    rig.hub.alarm({ host_s: 5991, kind: 'clock_warning', detail: 'still off by 2.1 %' });
    await expect.poll(() => page.locator('#alarms li').count()).toBe(4);
    await expect(page.getAttribute('#alarm-banner', 'data-level')).resolves.toBe('alarm');
    const levels = await page
      .locator('#alarms li')
      .evaluateAll((els) =>
        els.map((e) => (e as unknown as { dataset: { level: string } }).dataset.level),
      );
    expect(levels).toEqual(['info', 'alarm', 'warning', 'info']);
    await page.screenshot({ path: 'test-artifacts/live-notices-desktop.png', fullPage: true });
    expect(await overflowing(page, TEXT_BOXES)).toEqual([]);
    await page.close();
  });

  it('from 390 to 1280 px: state and time to cutoff read in full, no text runs out of its box', async () => {
    rig.hub.alarm({
      host_s: 5992,
      kind: 'over_temperature',
      detail: 'over_temperature: 60.6 °C is above the limit of 60 °C',
    });
    const page = await open(390, 844);
    await page.waitForSelector('#alarm-banner:not([hidden])');
    await expect(page.textContent('#state')).resolves.toBe('discharging');
    await expect.poll(() => page.textContent('#r-ttc')).toMatch(/^≈ /);
    // The longest time to cutoff the page writes, in the narrowest tile.
    await page.evaluate(`document.getElementById('r-ttc').textContent = '≈ 11 h 59 min'`);
    for (const width of [390, 700, 1000, 1280]) {
      await page.setViewportSize({ width, height: 900 });
      await page.waitForTimeout(200);
      expect(await overflowing(page, TEXT_BOXES), `at ${width} px`).toEqual([]);
      const wider = await page.evaluate<number>(
        'document.documentElement.scrollWidth - window.innerWidth',
      );
      expect(wider, `at ${width} px`).toBeLessThanOrEqual(0);
      await page.screenshot({ path: `test-artifacts/live-page-${width}.png`, fullPage: true });
    }
    await page.close();
  });
});
