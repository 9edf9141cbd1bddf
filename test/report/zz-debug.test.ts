import { join } from 'node:path';
import { rm } from 'node:fs/promises';
import { it } from 'vitest';
import { chromium } from 'playwright-core';
import { reportRuns } from '../../src/report/report-runs.js';
import { demoScenario, referenceCalibration, simulateRun } from './sim-run.js';
it('dbg', async () => {
  const root = '/tmp/cv-look2';
  await rm(root, { recursive: true, force: true });
  const nimh = demoScenario({
  name: 'nimh-aaa',
  cell: { chemistry: 'nimh', cells: 1, capacity_Ah: 0.54, initial_soc: 1, internal_ohm_per_cell: 0.06 },
  load: { load_ohm: 11.9, mosfet_ohm: 0.015 },
  thermal: { ambient_C: 21, heat_capacity_J_per_K: 10, conductance_W_per_K: 0.05, load_heat_fraction: 0, extra_heat_W: 0 },
  rig: { rig_id: 'simrig-n2', firmware: 'sim-1.0', clock_error: -0.03, frame_period_ms: 1000, channel: 0 },
  front_end: { current_offset_A: 0.004, current_gain_error: 0.02, voltage_gain_error: -0.003, noise_counts: 0.8 },
});
  await simulateRun({ dir: join(root, 'a'), scenario: nimh, calibration: referenceCalibration(nimh), afterEndS: 10 });
  const out = await reportRuns({ folders: [join(root, 'a')], ratedAh: 0.5 });
  const b = await chromium.launch({ executablePath: '/usr/bin/chromium', args: ['--no-sandbox'] });
  const p = await b.newPage({ viewport: { width: 1000, height: 800 } });
  await p.goto('file://' + out.runs[0]!.reportPath);
  const h = await p.evaluate('document.body.scrollHeight') as number;
  for (let y = 0, i = 0; y < h; y += 1300, i++) await p.screenshot({ path: `${root}/part${i}.png`, fullPage: true, clip: { x: 0, y, width: 1000, height: Math.min(1300, h - y) } });
  await b.close();
}, 60000);
