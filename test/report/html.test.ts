import { existsSync, mkdirSync } from 'node:fs';
import { mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RecomputedResult } from '../../src/report/recompute.js';
import { reportRuns, type ReportOutcome } from '../../src/report/report-runs.js';
import { demoScenario, referenceCalibration, simulateRun } from './sim-run.js';

const CHROMIUM = '/usr/bin/chromium';
// In CI the browser must be there; elsewhere a missing one skips.
const skip = !existsSync(CHROMIUM) && !process.env.CI;

/** A 0.5 Ah NiMH cell on a 12 Ω load: about 0.2 It for a little over 5 h (demo numbers). */
const nimh = demoScenario({
  name: 'nimh-aaa',
  cell: {
    chemistry: 'nimh',
    cells: 1,
    capacity_Ah: 0.54,
    initial_soc: 1,
    internal_ohm_per_cell: 0.06,
  },
  load: { load_ohm: 11.9, mosfet_ohm: 0.015 },
  thermal: {
    ambient_C: 21,
    heat_capacity_J_per_K: 10,
    conductance_W_per_K: 0.05,
    load_heat_fraction: 0,
    extra_heat_W: 0,
  },
  rig: {
    rig_id: 'simrig-n2',
    firmware: 'sim-1.0',
    clock_error: -0.03,
    frame_period_ms: 1000,
    channel: 0,
  },
  front_end: {
    current_offset_A: 0.004,
    current_gain_error: 0.02,
    voltage_gain_error: -0.003,
    noise_counts: 0.8,
  },
});

let root: string;
let single: ReportOutcome;
let compared: ReportOutcome;

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-html-'));
  const calibration = referenceCalibration(nimh);
  const a = await simulateRun({
    dir: join(root, 'nimh'),
    scenario: nimh,
    calibration,
    afterEndS: 10,
  });
  single = await reportRuns({
    folders: [a.folder],
    ratedAh: 0.5,
    generatedAt: '2026-12-03T10:00:00Z',
  });
  // The same kind of cell at three loads, for the comparison page.
  const li = (ohm: number, name: string) =>
    demoScenario({ name, load: { load_ohm: ohm, mosfet_ohm: 0.015 } });
  const runs = await Promise.all([
    simulateRun({ dir: join(root, 'li-3'), scenario: li(3, 'li-3-ohm') }),
    simulateRun({ dir: join(root, 'li-6'), scenario: li(6, 'li-6-ohm') }),
    simulateRun({ dir: join(root, 'li-12'), scenario: li(12, 'li-12-ohm') }),
  ]);
  compared = await reportRuns({
    folders: runs.map((r) => r.folder),
    out: join(root, 'compare.html'),
    generatedAt: '2026-12-03T10:00:00Z',
  });
}, 120_000);

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('report.html as text', () => {
  it('is self-contained: no scripts, no links, nothing to fetch', async () => {
    for (const path of [single.runs[0]!.reportPath, compared.comparisonPath!]) {
      const html = await readFile(path, 'utf8');
      expect(html).not.toMatch(/<script|<link|<img|<iframe|@import|url\(/i);
      expect(html.replace(/xmlns="http:\/\/www\.w3\.org\/2000\/svg"/g, '')).not.toMatch(
        /https?:\/\//,
      );
    }
  });
});

describe.skipIf(skip)('report.html in headless Chromium', () => {
  let browser: Browser;
  let page: Page;
  const requests: string[] = [];

  beforeAll(async () => {
    mkdirSync('test-artifacts', { recursive: true });
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
    page = await browser.newPage({ viewport: { width: 1000, height: 900 } });
    page.on('request', (r) => {
      if (!r.url().startsWith('file:')) requests.push(r.url());
    });
  });

  afterAll(async () => {
    await browser?.close();
  });

  const values = (key: string): Promise<string[]> =>
    page
      .locator(`td[data-key="${key}"]`)
      .evaluateAll((els) => els.map((e) => e.getAttribute('data-value') ?? ''));

  it('the run report has its plots and tables, and its numbers are those of the result file', async () => {
    const run = single.runs[0]!;
    await page.goto(`file://${resolve(run.reportPath)}`);
    const result = JSON.parse(await readFile(run.resultPath, 'utf8')) as RecomputedResult;

    for (const id of ['voltage-charge', 'voltage-time', 'current-time', 'temperature-time']) {
      const plot = page.locator(`svg.cv-plot[data-plot="${id}"]`);
      await expect(plot.count()).resolves.toBe(1);
      const points = Number(await plot.locator('polyline').first().getAttribute('data-points'));
      expect(points).toBeGreaterThan(100);
      const box = await plot.boundingBox();
      expect(box!.width).toBeGreaterThan(500);
    }
    for (const table of [
      'capacity-by-voltage',
      'dc-resistance',
      'budget-Ah',
      'budget-Wh',
      'calibration',
      'frames',
      'events',
    ]) {
      await expect(
        page.locator(`table[data-table="${table}"] tbody tr`).count(),
      ).resolves.toBeGreaterThan(0);
    }

    expect(Number((await values('capacity_Ah'))[0])).toBe(result.capacity_Ah);
    expect(Number((await values('energy_Wh'))[0])).toBe(result.energy_Wh);
    expect(Number((await values('duration_s'))[0])).toBe(result.duration_s);
    expect(Number((await values('frames_accepted'))[0])).toBe(result.frames_accepted);
    expect(Number((await values('rig_clock_error_ppm'))[0])).toBe(result.rig_clock_error_ppm);
    expect(Number((await values('uncertainty.capacity_Ah.expanded'))[0])).toBe(
      result.uncertainty.capacity_Ah.expanded,
    );
    expect(Number((await values('budget.Ah.expanded'))[0])).toBe(
      result.uncertainty.capacity_Ah.expanded,
    );
    expect(Number((await values('budget.Wh.standard'))[0])).toBe(
      result.uncertainty.energy_Wh.standard,
    );
    const budget = (await values('budget.Ah')).map(Number);
    expect(budget).toEqual(result.uncertainty.capacity_Ah.terms.map((t) => t.u));
    const steps = (await values('step.capacity_Ah')).map((v) => (v === '' ? null : Number(v)));
    expect(steps).toEqual(result.capacity_by_voltage.map((s) => s.capacity_Ah));
    await expect(
      page.locator('td[data-key="capacity_Ah"]').first().textContent(),
    ).resolves.toContain(`${result.capacity_Ah.toFixed(4)} Ah`);

    // A NiMH cell at about 0.2 It for over 5 h, but through a resistor: its current is neither
    // within ±1 % of 0.2 It nor constant (IEC 61951-2's discharge is at constant current, from
    // memory), so no verdict, and the box says why.
    const verdict = page.locator('[data-verdict]');
    await expect(verdict.getAttribute('data-verdict')).resolves.toBe(result.verdict!.outcome);
    await expect(verdict.textContent()).resolves.toContain(
      'a check against the method of IEC 61951-2, not a certification',
    );
    expect(result.verdict!.outcome).toBe('method_not_followed');
    await expect(verdict.textContent()).resolves.toMatch(
      /No verdict[\s\S]*(the mean current was|the current was not constant)/,
    );
    await expect(page.locator('#cautions li').count()).resolves.toBeGreaterThan(3);
    await page.screenshot({ path: 'test-artifacts/report-run.png', fullPage: true });
    expect(requests).toEqual([]);
  });

  it("the comparison page overlays every run and fits Peukert's exponent across their currents", async () => {
    await page.goto(`file://${resolve(compared.comparisonPath!)}`);
    const lines = page.locator('svg.cv-plot[data-plot="voltage-charge"] polyline');
    await expect(lines.count()).resolves.toBe(3);
    await expect(page.locator('table[data-table="runs"] tbody tr').count()).resolves.toBe(3);
    const capacities = (await values('capacity_Ah')).map(Number);
    expect(capacities).toEqual(compared.runs.map((r) => r.figures.result.capacity_Ah));
    const k = Number(await page.locator('[data-key="peukert_k"]').getAttribute('data-value'));
    expect(k).toBeGreaterThan(0.9);
    expect(k).toBeLessThan(1.5);
    await page.screenshot({ path: 'test-artifacts/report-compare.png', fullPage: true });
    expect(requests).toEqual([]);
  });
});
