import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { onlyRunFolder, readJson, startDaemon } from '../e2e/pty-helpers.js';
import {
  RIG_PROFILE,
  startEmulatedRig,
  waitUntil,
  type EmulatedRig,
  type HarnessTruth,
} from './emulated-rig.js';

// Li-ion's highest discharge temperature is 60 °C (common practice). The air around the cell is
// raised to 90 °C mid-discharge; the host must switch the load off within 2 s of the cell
// really reaching 60 °C.
describe('reference firmware on an emulated chip: over-temperature', () => {
  let rig: EmulatedRig;
  let exitCode: number | null;
  let output = '';
  let result: { end_reason: string; load_off_confirmed: boolean };
  let truth: HarnessTruth;

  beforeAll(async () => {
    rig = await startEmulatedRig({ capacityMah: 200, soc: 0.9, thermalTauS: 5, seed: 31 });
    const runs = join(rig.dir, 'runs');
    const d = startDaemon([
      '--port',
      rig.port,
      '--rig',
      RIG_PROFILE,
      '--chemistry',
      'li-ion',
      '--once',
      '--no-live',
      '--runs',
      runs,
    ]);
    await waitUntil(() => rig.truth().channels[0].load_on, 20_000, 'the load to go on');
    rig.control('ambient 90');
    exitCode = await d.exit;
    output = d.stdout() + d.stderr();
    await new Promise((r) => setTimeout(r, 300));
    truth = rig.truth();
    result = readJson(join(onlyRunFolder(runs), 'result.json'));
  }, 60_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('ends as over_temperature with exit code 3 and the load off confirmed', () => {
    expect(exitCode, output).toBe(3);
    expect(result.end_reason).toBe('over_temperature');
    expect(result.load_off_confirmed).toBe(true);
  });

  it('the load pin fell within 2 s of the cell truly reaching 60 °C, and stayed low', () => {
    const ch = truth.channels[0];
    expect(ch.hot_at_ms).toBeGreaterThan(0);
    const segs = ch.segments;
    expect(segs.map((s) => s.load)).toEqual([false, true, false]);
    const offAt = segs[2]!.from_ms;
    expect(offAt - ch.hot_at_ms).toBeGreaterThan(0);
    expect(offAt - ch.hot_at_ms).toBeLessThan(2000);
  });
});
