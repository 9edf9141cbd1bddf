import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { daemonOnRig, finishedRun, type FinishedRun } from './daemon-on-rig.js';
import { startEmulatedRig, waitUntil, type EmulatedRig } from './emulated-rig.js';

// Li-ion's highest discharge temperature is 60 °C (common practice). The air around the cell is
// raised to 90 °C mid-discharge; the host must switch the load off within 2 s of the cell
// really reaching 60 °C.
describe('reference firmware on an emulated chip: over-temperature', () => {
  let rig: EmulatedRig;
  let run: FinishedRun<{ end_reason: string; load_off_confirmed: boolean }>;

  beforeAll(async () => {
    rig = await startEmulatedRig({ capacityMah: 200, soc: 0.9, thermalTauS: 5, seed: 31 });
    const on = daemonOnRig(rig);
    const d = on.start();
    await waitUntil(() => rig.truth().channels[0].load_on, 20_000, 'the load to go on');
    rig.control('ambient 90');
    run = await finishedRun(rig, on, d);
  }, 60_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('ends as over_temperature with exit code 3 and the load off confirmed', () => {
    expect(run.exitCode, run.output).toBe(3);
    expect(run.result.end_reason).toBe('over_temperature');
    expect(run.result.load_off_confirmed).toBe(true);
  });

  it('the load pin fell within 2 s of the cell truly reaching 60 °C, and stayed low', () => {
    const ch = run.truth.channels[0];
    expect(ch.hot_at_ms).toBeGreaterThan(0);
    const segs = ch.segments;
    expect(segs.map((s) => s.load)).toEqual([false, true, false]);
    const offAt = segs[2]!.from_ms;
    expect(offAt - ch.hot_at_ms).toBeGreaterThan(0);
    expect(offAt - ch.hot_at_ms).toBeLessThan(2000);
  });
});
