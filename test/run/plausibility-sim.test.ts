import { mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { exitCodeForResult } from '../../src/record/result.js';
import { loadScenarios } from '../../src/sim/scenarios.js';
import {
  demoScenario,
  referenceCalibration,
  simulateRun,
  type SimRunOptions,
} from '../report/sim-run.js';
import { SCENARIO_FILE } from '../sim/helpers.js';

let root: string;
beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-plausible-'));
});
afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

/** One NiMH cell of 60 mAh on a 2.2 Ω load (about 0.5 A), calibrated, 10 frames a second. */
const nimh = demoScenario({
  cell: {
    chemistry: 'nimh',
    cells: 1,
    capacity_Ah: 0.06,
    initial_soc: 1,
    internal_ohm_per_cell: 0.03,
  },
  load: { load_ohm: 2.2, mosfet_ohm: 0.015 },
});
const calibration = referenceCalibration(nimh);

async function run(name: string, o: Partial<SimRunOptions> = {}) {
  const r = await simulateRun({ dir: join(root, name), scenario: nimh, calibration, ...o });
  const events = (await readFile(join(root, name, 'events.jsonl'), 'utf8'))
    .trim()
    .split('\n')
    .map((l) => JSON.parse(l) as { event: string; [k: string]: unknown });
  return { ...r, events, named: (e: string) => events.filter((x) => x.event === e) };
}

const rel = (x: number, truth: number): number => Math.abs(x / truth - 1);

// Energy is the time integral of V·I at the terminals (physics); the simulator's truth is the
// trapezoid over its 10 ms steps. NiMH: highest resting voltage 1.5 V a cell (from memory).
describe('implausible readings through the pipeline, on the simulated rig', () => {
  it('a divider wire broken for 1 s (the voltage reads full scale, 6.6 V): left out, counted, the run goes on to its cutoff with the true energy', async () => {
    const r = await run('glitch', {
      overrides: { circuit: { voltageSense: { fromMs: 60_000, toMs: 61_000, counts: 4095 } } },
    });
    expect(r.result.end_reason).toBe('cutoff');
    expect(r.named('implausible_reading').length).toBeGreaterThanOrEqual(9);
    expect(r.named('implausible_reading')[0]).toMatchObject({ count: 1, note: 'not integrated' });
    // 1 s at 10 frames a second, give or take the frame at each edge.
    expect(r.result.frames_implausible).toBeGreaterThanOrEqual(9);
    expect(r.result.frames_implausible).toBeLessThanOrEqual(11);
    expect(rel(r.result.energy_Wh, r.truth.energyWh)).toBeLessThan(0.005);
    expect(rel(r.result.capacity_Ah, r.truth.chargeAh)).toBeLessThan(0.005);
    // The report recomputes the same figures from the raw counts: the same frames left out.
    const f = await recomputeRun(await openRunFolder(r.folder));
    expect(f.result.capacity_Ah).toBeCloseTo(r.result.capacity_Ah, 5);
    expect(f.result.energy_Wh).toBeCloseTo(r.result.energy_Wh, 5);
    expect(f.result.bridged_Ah).toBeCloseTo(r.result.bridged_Ah, 5);
    expect(f.result.frames_implausible).toBe(r.result.frames_implausible);
  });

  it('held: the run ends as implausible_reading (exit 3), the load off, the energy still true', async () => {
    const r = await run('held', {
      overrides: { circuit: { voltageSense: { fromMs: 60_000, toMs: 75_000, counts: 4095 } } },
    });
    expect(r.result.end_reason).toBe('implausible_reading');
    expect(r.result.frames_implausible).toBeGreaterThanOrEqual(20);
    expect(r.result.load_off_confirmed).toBe(true);
    expect(r.truth.loadOn).toBe(false);
    expect(exitCodeForResult(r.result as unknown as Record<string, unknown>)).toBe(3);
    expect(r.result.end_detail).toMatch(/^implausible_reading: 6\.\d+ V is above 1\.875 V/);
    expect(rel(r.result.energy_Wh, r.truth.energyWh)).toBeLessThan(0.005);
  });

  it('a fuse blowing mid-run: open_load alarm within 3.5 s, the run ends as open_load (exit 3) within 11 s', async () => {
    const r = await run('fuse', { overrides: { circuit: { openLoadAtMs: 60_000 } } });
    expect(r.result.end_reason).toBe('open_load');
    const alarm = r.named('open_load')[0];
    expect(alarm?.host_s).toBeGreaterThanOrEqual(63);
    expect(alarm?.host_s).toBeLessThanOrEqual(63.5);
    const stopping = r.named('state').find((e) => e['to'] === 'stopping');
    expect(stopping?.host_s).toBeLessThanOrEqual(71);
    expect(rel(r.result.capacity_Ah, r.truth.chargeAh)).toBeLessThan(0.005);
  });
});

describe('no false alarm on the shipped scenarios', () => {
  const scenarios = [...loadScenarios(SCENARIO_FILE).byName.values()];
  for (const scenario of scenarios) {
    it(`${scenario.name}: ten minutes of discharge raise no implausible or open-load event`, async () => {
      const r = await simulateRun({
        dir: join(root, `shipped-${scenario.name}`),
        scenario,
        stopAtS: 600,
      });
      const text = await readFile(join(r.folder, 'events.jsonl'), 'utf8');
      expect(text).not.toMatch(/"event":"(implausible_reading|implausible_summary|open_load)"/);
      // A scenario whose thermistor breaks in use ends on that fault, as it should.
      const breaks = (scenario.front_end.thermistor ?? 'ok') !== 'ok';
      expect(['stopped', 'cutoff', 'over_temperature', ...(breaks ? ['fault'] : [])]).toContain(
        r.result.end_reason,
      );
    });
  }
});
