import { copyFile, mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { formatSampleRow, SAMPLE_HEADER } from '../../src/sinks/sample-row.js';
import { BENCH_PROFILE, demoScenario, simulateRun } from './sim-run.js';

let root: string;
let seed: string;

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-resume-'));
  seed = (await simulateRun({ dir: join(root, 'seed'), scenario: demoScenario() })).folder;
}, 60_000);

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

const I_RAW = 750;
const T0 = Date.UTC(2026, 11, 2, 11, 0, 0);

/** Rows at 10 Hz from `fromS` to `toS` (inclusive), the load on or off, as the daemon writes them. */
function rows(
  fromS: number,
  toS: number,
  on: boolean,
  state: string,
  seq: { n: number },
): string[] {
  const out: string[] = [];
  for (let k = Math.round(fromS * 10); k <= Math.round(toS * 10); k++) {
    const hostS = k / 10;
    out.push(
      formatSampleRow({
        hostS,
        wallMs: T0 + hostS * 1000,
        channel: 0,
        seq: seq.n++ & 0xffff,
        tickMs: Math.round(hostS * 1000),
        vRaw: 2500,
        iRaw: on ? I_RAW : 0,
        tRaw: 2100,
        flags: on ? 1 : 0,
        volts: 4.03,
        amps: 0,
        celsius: 22,
        chargeAh: 0,
        energyWh: 0,
        state,
        calibrationId: 'none',
      }),
    );
  }
  return out;
}

describe('a resumed run', () => {
  it('nothing is interpolated across the time the daemon was down; its estimate of what flowed meanwhile is counted (charge = current × time)', async () => {
    const dir = join(root, 'resumed');
    await mkdir(dir);
    await copyFile(join(seed, 'manifest.json'), join(dir, 'manifest.json'));
    const seq = { n: 0 };
    // 100 s under load; the daemon dies; it is back 60 s later; the rig's watchdog had cut the
    // load, so the daemon estimates 5.25 s of unlogged load-on time; the load goes on again at 200 s.
    const lines = [
      SAMPLE_HEADER,
      ...rows(0, 100, true, 'discharging', seq),
      ...rows(170, 200, false, 'precheck', seq),
      ...rows(200.1, 300, true, 'discharging', seq),
    ];
    await writeFile(join(dir, 'samples-0001.csv'), `${lines.join('\n')}\n`);
    const events = [
      {
        host_s: 0,
        event: 'run_started',
        source: 'test rows',
        chemistry: 'li-ion',
        cells: 1,
        cutoff_V: 3,
        version: '0.1.0',
      },
      {
        host_s: 160,
        event: 'resumed',
        rows: 1001,
        charge_Ah: 0,
        energy_Wh: 0,
        down_s: 60,
        cut_bytes: 0,
        source: 'test rows',
      },
      {
        host_s: 170.05,
        event: 'unlogged_discharge',
        estimated_s: 5.25,
        charge_Ah: 0,
        basis: 'the watchdog cut the load',
      },
    ];
    await writeFile(
      join(dir, 'events.jsonl'),
      `${events.map((e) => JSON.stringify({ ...e, wall_time: new Date(T0 + e.host_s * 1000).toISOString() })).join('\n')}\n`,
    );

    const f = await recomputeRun(await openRunFolder(dir));
    const amps = new AnalogChain(BENCH_PROFILE).amps(I_RAW);
    // 100 s, plus 5.25 s estimated, plus half a frame where the load goes back on, plus 99.9 s.
    expect(f.result.capacity_Ah).toBeCloseTo((amps * (100 + 5.25 + 0.05 + 99.9)) / 3600, 6);
    // Load-on time as the daemon counts it: the step in which the load switched counts half.
    expect(f.result.duration_s).toBeCloseTo(100 + 5.25 + 0.05 + 99.9, 6);
    expect(f.result.bridged_Ah).toBeCloseTo((amps * 5.25) / 3600, 6);
    expect(f.result.end_reason).toBe('interrupted');
    expect(
      f.result.uncertainty.capacity_Ah.terms.some((t) => t.name.startsWith('charge bridged')),
    ).toBe(true);
    expect(f.notes.join(' ')).toContain('resumed 1 time');
    expect(f.loadSwitchOns).toBe(2);
  });
});
