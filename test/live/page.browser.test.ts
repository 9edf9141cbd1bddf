import { existsSync, mkdirSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { chromium, type Browser, type Page } from 'playwright-core';
import { LiveHub } from '../../src/live/live-hub.js';
import { startLiveServer } from '../../src/live/live-server.js';
import { DEMO_RUN, scriptedDischarge, startRig, type Rig } from './helpers.js';

const CHROMIUM = '/usr/bin/chromium';
// In CI the browser must be there (.ci/run installs it); elsewhere a missing one skips.
const skip = !existsSync(CHROMIUM) && !process.env.CI;

/** Pixels of the canvas in `selector` close to the colour (r, g, b): evidence a series was drawn. */
function countColour(
  page: Page,
  selector: string,
  [r, g, b]: [number, number, number],
): Promise<number> {
  // Runs in the page; a string, since the project compiles without the DOM library.
  return page.evaluate<number>(`(() => {
    const c = document.querySelector(${JSON.stringify(selector)});
    const data = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
    let n = 0;
    for (let i = 0; i < data.length; i += 4)
      if (Math.abs(data[i] - ${r}) < 40 && Math.abs(data[i + 1] - ${g}) < 40 && Math.abs(data[i + 2] - ${b}) < 40 && data[i + 3] > 200) n++;
    return n;
  })()`);
}

describe.skipIf(skip)('live page in headless Chromium', () => {
  let browser: Browser;
  let rig: Rig;
  const problems: string[] = [];

  beforeAll(async () => {
    mkdirSync('test-artifacts', { recursive: true });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      // launch() gives every browser a fresh temporary profile (user-data-dir) of its own.
      args: [
        '--headless',
        '--no-sandbox',
        '--disable-gpu',
        '--disable-quic',
        '--no-first-run',
        '--disable-background-networking',
        '--disable-component-update',
        '--disable-sync',
      ],
    });
    rig = await startRig({}, new LiveHub({ historyPoints: 400 }));
  });

  afterAll(async () => {
    await browser?.close();
    await rig?.server.close();
  });

  it('draws the run, shows the state, takes control with the token, alerts on a limit and shows the end of the run', async () => {
    const script = [...scriptedDischarge(1200, 5)];
    rig.hub.state({ host_s: 0, from: 'starting', to: 'discharging', why: 'load confirmed on' });
    for (const s of script.slice(0, 800)) rig.hub.sample(s);

    const page = await browser.newPage({ viewport: { width: 1280, height: 900 } });
    page.on('console', (m) => m.type() === 'error' && problems.push(m.text()));
    page.on('pageerror', (e) => problems.push(e.message));
    page.on('requestfailed', (r) => problems.push(`request failed: ${r.url()}`));
    await page.goto(rig.server.url);

    await expect.poll(() => page.textContent('#state')).toBe('discharging');
    await expect(page.textContent('#run-title')).resolves.toContain('shed-pack-b');
    // The history from hello is drawn: the voltage series' colour is on the voltage chart's canvas.
    await page.waitForSelector('#chart-voltage canvas');
    await expect
      .poll(() => countColour(page, '#chart-voltage canvas', [108, 182, 255]), { timeout: 5000 })
      .toBeGreaterThan(200);

    // Samples stream in and move the readouts.
    for (const s of script.slice(800)) rig.hub.sample(s);
    const last = script.at(-1)!;
    await expect.poll(() => page.textContent('#r-voltage')).toBe(last.voltage_V.toFixed(3));
    await expect.poll(() => page.textContent('#r-elapsed')).toBe('1:39:55');
    await expect(page.textContent('#r-ttc')).resolves.toMatch(/^≈ \d/);

    // Control asks for the control token, then the daemon side receives the request. 6.25 V is
    // above the present loaded voltage, so it would end the run now: the page asks first, and a
    // "no" sends nothing.
    expect(last.voltage_V).toBeLessThan(6.25);
    page.once('dialog', (d) => void d.dismiss());
    await page.fill('#cutoff-input', '6.250');
    await page.click('#cutoff-form button[type=submit]');
    await expect.poll(() => page.textContent('#control-reply')).toMatch(/not changed/);
    page.once('dialog', (d) => void d.accept());
    await page.click('#cutoff-form button[type=submit]');
    await page.waitForSelector('#token-dialog[open]');
    await page.fill('#token-input', rig.tokens.control);
    await page.click('#token-ok');
    await expect.poll(() => page.textContent('#control-reply')).toMatch(/done/);
    expect(rig.accepted).toEqual([{ type: 'set-cutoff', cutoff_V: 6.25, confirm: true }]);
    await expect.poll(() => page.textContent('#r-cutoff')).toBe('6.250');
    await expect.poll(() => page.textContent('#events')).toMatch(/cutoff: 6\.250 V/);
    // A cutoff below the floor is refused in the page before it is even sent.
    await page.fill('#cutoff-input', '4');
    await page.click('#cutoff-form button[type=submit]');
    await expect(page.textContent('#control-reply')).resolves.toMatch(/below the floor/);
    expect(rig.accepted).toHaveLength(1);

    // An alarm stands out; the end of the run is shown with its figures.
    rig.hub.alarm({
      host_s: 5995,
      kind: 'over_temperature',
      detail: '60.4 °C is above the limit of 60 °C',
    });
    await page.waitForSelector('#alarm-banner:not([hidden])');
    await expect(page.textContent('#alarm-title')).resolves.toBe('Alarm: over temperature');
    await expect(page.getAttribute('#alarm-banner', 'data-level')).resolves.toBe('alarm');
    rig.hub.state({ host_s: 5995, from: 'discharging', to: 'ended', why: 'over temperature' });
    rig.hub.result({
      end_reason: 'over_temperature',
      capacity_Ah: last.charge_Ah,
      energy_Wh: last.energy_Wh,
      duration_s: last.host_s,
      end_voltage_V: last.voltage_V,
    });
    await page.waitForSelector('#result-banner:not([hidden])');
    await expect(page.textContent('#result-title')).resolves.toBe('Run ended: over temperature');
    await expect(page.textContent('#result-text')).resolves.toContain(
      `${(last.charge_Ah * 1000).toFixed(0)} mAh`,
    );
    await expect(page.getAttribute('#result-banner', 'data-severity')).resolves.toBe('limit');
    await expect(page.isDisabled('#stop-btn')).resolves.toBe(true);
    await expect.poll(() => page.textContent('#state')).toBe('ended');
    await page.screenshot({ path: 'test-artifacts/live-page.png', fullPage: true });

    // Readable on a phone: nothing wider than the screen.
    await page.setViewportSize({ width: 390, height: 844 });
    await page.waitForTimeout(300);
    const overflow = await page.evaluate<number>(
      'document.documentElement.scrollWidth - window.innerWidth',
    );
    expect(overflow).toBeLessThanOrEqual(0);
    await page.screenshot({ path: 'test-artifacts/live-page-phone.png', fullPage: true });
    expect(problems).toEqual([]);
    await page.close();
  });

  it('reconnects by itself after the daemon restarts and shows the new run', async () => {
    const page = await browser.newPage();
    await page.goto(rig.server.url);
    await expect
      .poll(() => page.getAttribute('#link', 'data-link'), { timeout: 15_000 })
      .toBe('live');
    const port = rig.server.port;
    await rig.server.close();
    await expect
      .poll(() => page.getAttribute('#link', 'data-link'), { timeout: 15_000 })
      .toBe('down');

    const hub = new LiveHub();
    hub.setRun({ ...DEMO_RUN, label: 'second-run' });
    hub.state({ host_s: 0, from: 'precheck', to: 'starting', why: 'resting voltage fine' });
    rig = {
      ...rig,
      hub,
      server: await startLiveServer({ hub, listen: `127.0.0.1:${port}`, tokenStore: rig.tokens }),
    };
    await expect
      .poll(() => page.textContent('#run-title'), { timeout: 15_000 })
      .toMatch(/^second-run/);
    await expect
      .poll(() => page.getAttribute('#link', 'data-link'), { timeout: 15_000 })
      .toBe('live');
    await expect(page.isHidden('#result-banner')).resolves.toBe(true);
    await expect.poll(() => page.textContent('#state')).toBe('starting');
    await page.close();
  });
});
