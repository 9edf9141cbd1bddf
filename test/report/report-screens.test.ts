/**
 * The report read as a person reads it: a swarm of lost frames summed per minute instead of a
 * red row each, a safety end highlighted, no rows for steps never reached, the temperature
 * limit drawn, times in local time with the zone, and nothing running out of its box at a
 * phone's width (390 CSS px) or a desktop's (1280 px). Peukert's law (t = H·(C/(I·H))^k,
 * hours-rate form) is fitted only across runs of one kind of cell.
 */
import { existsSync, mkdirSync } from 'node:fs';
import { mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { chromium, type Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ListedEvent } from '../../src/report/event-digest.js';
import { eventRows } from '../../src/report/html-events.js';
import { localTime } from '../../src/report/html-text.js';
import {
  fitPeukert,
  peukertHours,
  selectPeukertRuns,
  type PeukertCandidate,
} from '../../src/report/peukert.js';
import { reportRuns, type ReportOutcome } from '../../src/report/report-runs.js';
import { isPulsed, timePlots } from '../../src/report/run-plots.js';
import { linePlot } from '../../src/report/svg-plot.js';
import { overflowing } from '../live/overflow.js';
import { demoScenario, simulateRun } from './sim-run.js';

const CHROMIUM = '/usr/bin/chromium';
const skip = !existsSync(CHROMIUM) && !process.env.CI;

describe('report parts (pure)', () => {
  it('sums 120 lost-frame events over two minutes into two rows, keeps the frame count', () => {
    const listed: ListedEvent[] = [];
    for (let k = 0; k < 120; k++)
      listed.push({ hostS: k, name: 'frames_lost', alarm: true, detail: `count: 2; seq: ${k}` });
    listed.push({
      hostS: 130,
      name: 'clock_warning',
      alarm: true,
      detail: 'rig_clock_error_ppm: 80000',
    });
    listed.push({ hostS: 140, name: 'load_off_unconfirmed', alarm: true, detail: '' });
    const rows = eventRows(listed);
    expect(rows.map((r) => [r.name, r.events, r.level])).toEqual([
      ['frames_lost', 60, 'warning'],
      ['frames_lost', 60, 'warning'],
      ['clock_warning', 1, 'note'],
      ['load_off_unconfirmed', 1, 'alarm'],
    ]);
    expect(rows[0]!.detail).toBe('120 frames lost in 60 gaps of the sequence');
  });

  it('writes local time with its zone (09:15:02 UTC is 10:15:02 in Berlin in December, CET = UTC+1)', () => {
    expect(localTime('2026-12-03T09:15:02Z', 'Europe/Berlin')).toMatch(
      /^2026-12-03 10:15:02 (CET|GMT\+1)$/,
    );
    expect(localTime('2026-12-03T09:15:02Z', 'UTC')).toBe('2026-12-03 09:15:02 UTC');
  });

  it('fits Peukert only across one kind of cell: a NiMH and an 8 mAh run are left out, with the reason', () => {
    // Hours from the law itself with k = 1.2, C = 2.6 Ah at the 20-hour rate.
    const li = (currentA: number, name: string): PeukertCandidate => ({
      name,
      currentA,
      hours: peukertHours(20, 2.6, 1.2, currentA),
      chemistry: 'li-ion',
      cells: 1,
      ratedAh: null,
      capacityAh: currentA * peukertHours(20, 2.6, 1.2, currentA),
      endReason: 'cutoff',
    });
    const runs = [
      li(0.5, 'li-a'),
      li(1.0, 'li-b'),
      li(2.0, 'li-c'),
      { ...li(0.1, 'nimh'), chemistry: 'nimh', hours: 5, capacityAh: 0.5 },
      { ...li(0.004, 'tiny'), hours: 2, capacityAh: 0.008 },
      { ...li(1.5, 'hot'), endReason: 'over_temperature' },
    ];
    const s = selectPeukertRuns(runs);
    expect(s.used.map((r) => r.name)).toEqual(['li-a', 'li-b', 'li-c']);
    expect(s.group).toBe('1 × li-ion');
    const why = Object.fromEntries(s.excluded.map((x) => [x.name, x.why]));
    expect(why['nimh']).toContain('1 × nimh, not 1 × li-ion');
    expect(why['tiny']).toContain('another kind of cell');
    expect(why['hot']).toContain('not at its cutoff');
    expect(fitPeukert(s.used).k).toBeCloseTo(1.2, 9);
  });
});

let root: string;
let normal: ReportOutcome;
let hot: ReportOutcome;
beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-screens-'));
  const lossy = await simulateRun({
    dir: join(root, 'lossy'),
    scenario: demoScenario({
      name: 'lossy-link',
      faults: { drop_probability: 0.03, garbage_probability: 0.01, burst_frames: 2, seed: 7 },
    }),
  });
  normal = await reportRuns({ folders: [lossy.folder], generatedAt: '2026-12-03T10:00:00Z' });
  const heated = await simulateRun({
    dir: join(root, 'hot'),
    scenario: demoScenario({
      name: 'hot-cell',
      thermal: {
        ambient_C: 40,
        heat_capacity_J_per_K: 5,
        conductance_W_per_K: 0.02,
        load_heat_fraction: 0,
        extra_heat_W: 1,
      },
    }),
  });
  hot = await reportRuns({ folders: [heated.folder], generatedAt: '2026-12-03T10:00:00Z' });
}, 120_000);
afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

describe('report.html', () => {
  it('sums lost frames per minute, drops unreached steps, draws the temperature limit', async () => {
    const r = normal.runs[0]!;
    expect(r.figures.result.frames_lost).toBeGreaterThan(50);
    const html = await readFile(r.reportPath, 'utf8');
    const eventRowsHtml = html.match(/<tr class="ev-[a-z]+"/g) ?? [];
    const minutes = Math.ceil(r.figures.result.duration_s / 60) + 2;
    // At most a row per kind and minute, where each lost frame had its own row before.
    expect(eventRowsHtml.length).toBeLessThan(r.figures.result.frames_lost);
    expect(html.match(/frames_lost ×\d+/g)!.length).toBeLessThanOrEqual(minutes);
    expect(html).not.toContain('not reached</td>');
    expect(html).toMatch(/data-plot="temperature-time"[\s\S]*?limit 60 °C/);
    expect(html).not.toContain('data-end="safety"');
  });

  it('highlights a run that ended on its temperature limit', async () => {
    const r = hot.runs[0]!;
    expect(r.figures.result.end_reason).toBe('over_temperature');
    const html = await readFile(r.reportPath, 'utf8');
    expect(html).toContain('data-end="safety"');
    expect(html).toContain('the cell passed its temperature limit');
    expect(html).toContain('<tr class="safety-end"><th>How it ended</th>');
  });
});

describe.skipIf(skip)('report.html in a browser at phone and desktop widths', () => {
  let browser: Browser;
  beforeAll(async () => {
    mkdirSync('test-artifacts', { recursive: true });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--no-first-run'],
    });
  });
  afterAll(async () => {
    await browser?.close();
  });

  it('no text runs out of its box; the plots take the page width', async () => {
    for (const [name, outcome] of [
      ['lossy', normal],
      ['hot', hot],
    ] as const) {
      for (const width of [390, 1280]) {
        const page = await browser.newPage({ viewport: { width, height: 900 } });
        await page.goto(`file://${resolve(outcome.runs[0]!.reportPath)}`);
        expect(
          await overflowing(page, 'h1, h2, h3, p, li, th, td, .box, .label'),
          `${name} at ${width} px`,
        ).toEqual([]);
        const wider = await page.evaluate<number>(
          'document.documentElement.scrollWidth - window.innerWidth',
        );
        expect(wider, `${name} at ${width} px`).toBeLessThanOrEqual(0);
        // A plot spans the main column (less its border), not a fixed 760 px.
        const plot = await page.evaluate<number[]>(
          `[document.querySelector('svg.cv-plot').getBoundingClientRect().width, document.querySelector('main').clientWidth]`,
        );
        expect(plot[0]!).toBeGreaterThan(plot[1]! - 60);
        await page.screenshot({
          path: `test-artifacts/report-${name}-${width}.png`,
          fullPage: true,
        });
        await page.close();
      }
    }
  });
});

describe('a pulsed run is plotted without averaging the pulses away', () => {
  it('draws the loaded and the resting voltage apart (a bucket of 5 loaded frames at 3.6 V and 5 at rest at 3.9 V)', () => {
    const bucket = (k: number) => ({
      t0: k * 60,
      t1: k * 60 + 59,
      q0: k * 0.01,
      q1: (k + 1) * 0.01,
      e1: 0,
      n: 10,
      nOn: 5,
      vMin: 3.6 - k * 0.01,
      vMax: 3.9 - k * 0.01,
      vSum: 5 * (3.6 - k * 0.01) + 5 * (3.9 - k * 0.01),
      vOnSum: 5 * (3.6 - k * 0.01),
      iMin: 0,
      iMax: 1.2,
      iSum: 5 * 1.2,
      tempSum: 250,
      tempN: 10,
    });
    const curve = Array.from({ length: 20 }, (_, k) => bucket(k));
    expect(isPulsed(curve)).toBe(true);
    const svg = timePlots(curve, 3.0, 60);
    const voltage = svg.slice(0, svg.indexOf('data-plot="current-time"'));
    expect(voltage).toContain('data-series="loaded"');
    expect(voltage).toContain('data-series="at rest"');
    // The plain mean (3.75 V at the first bucket) would be the only line; the loaded line is
    // lower than the resting one everywhere.
    const ys = (name: string): number[] =>
      /data-series="([^"]+)"[^>]*points="([^"]+)"/g
        .exec(voltage.slice(voltage.indexOf(`data-series="${name}"`)))![2]!
        .split(' ')
        .map((p) => Number(p.split(',')[1]));
    const loaded = ys('loaded');
    const rest = ys('at rest');
    // SVG y grows downwards: a lower voltage has a larger y.
    loaded.forEach((y, i) => expect(y).toBeGreaterThan(rest[i]!));
    expect(svg).toContain('data-series="current while loaded"');
  });
});

describe('the legend of a comparison fits its plot', () => {
  it('eight runs with long folder names wrap inside the frame, each name shortened to fit', () => {
    const series = Array.from({ length: 8 }, (_, k) => ({
      name: `20261203-0${k}1500-batch-b-cell-${k}-second-try`,
      color: '#000',
      points: [[0, 4.1] as const, [1, 3.0] as const],
    }));
    const svg = linePlot({ id: 'x', title: 't', x: { label: 'x' }, y: { label: 'y' }, series });
    const texts = [
      ...svg.matchAll(
        /<text x="([\d.]+)" y="([\d.]+)" class="cv-legend"[^>]*><title>[^<]*<\/title>([^<]*)</g,
      ),
    ];
    expect(texts).toHaveLength(8);
    for (const [, x, , shown] of texts) {
      expect(shown!.length).toBeLessThanOrEqual(26);
      expect(Number(x) + shown!.length * 6.4).toBeLessThanOrEqual(1000 - 16);
    }
    expect(new Set(texts.map((t) => t[2])).size).toBeGreaterThan(1);
  });
});
