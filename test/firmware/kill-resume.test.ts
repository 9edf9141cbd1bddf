import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { daemonOnRig, finishedRun, runEvents, type FinishedRun } from './daemon-on-rig.js';
import {
  startEmulatedRig,
  waitUntil,
  type EmulatedRig,
  type HarnessTruth,
} from './emulated-rig.js';

interface Result {
  capacity_Ah: number;
  end_reason: string;
  bridged_Ah: number;
  uncertainty: { capacity_Ah: { expanded: number } };
}

// Protocol v1: a rig that hears no heartbeat for 5 s switches every load off by itself. Here the
// firmware does it, on the emulated chip, after the daemon is killed without warning; a second
// daemon on the same port then finishes the run.
describe('reference firmware on an emulated chip: daemon SIGKILLed, the firmware cuts, the run resumes', () => {
  let rig: EmulatedRig;
  let afterKill: HarnessTruth;
  let run: FinishedRun<Result>;

  beforeAll(async () => {
    rig = await startEmulatedRig({ capacityMah: 20, soc: 0.7, seed: 41 });
    const on = daemonOnRig(rig);
    const first = on.start();
    await waitUntil(() => rig.truth().channels[0].load_on, 20_000, 'the load to go on');
    await new Promise((r) => setTimeout(r, 3000));
    first.child.kill('SIGKILL');
    await first.exit;
    await waitUntil(
      () => rig.truth().channels[0].segments.length >= 3,
      8000,
      'the firmware to cut the load',
    );
    afterKill = rig.truth();
    run = await finishedRun(rig, on, on.start());
  }, 120_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('the load pin fell 5 s after the host’s last heartbeat reached the chip (emulated time)', () => {
    const cutAt = afterKill.channels[0].segments[2]!.from_ms;
    const lastHeard = afterKill.link.last_host_byte_ms;
    // A line that arrives while the firmware takes a frame's conversions (5.3 ms) waits for
    // them: the heartbeat is stamped up to that much after its bytes came in.
    expect(cutAt - lastHeard).toBeGreaterThan(5000);
    expect(cutAt - lastHeard).toBeLessThan(5010);
  });

  it('the second daemon resumed the run: a new precheck, the load on again, off at the cutoff', () => {
    expect(run.exitCode, run.output).toBe(0);
    expect(run.output).toMatch(/Resuming an interrupted run/);
    expect(run.result.end_reason).toBe('cutoff');
    const events = runEvents<{ event: string }>(run.folder).map((e) => e.event);
    expect(events).toEqual(expect.arrayContaining(['resumed', 'precheck_passed', 'run_ended']));
    expect(run.truth.channels[0].segments.map((s) => s.load)).toEqual([
      false,
      true,
      false,
      true,
      false,
    ]);
  });

  it('the capacity, unlogged seconds included, is inside the stated interval around the charge the cell gave (∫ I dt, physics; k = 2, GUM)', () => {
    const truthAh = run.truth.channels[0].charge_Ah;
    expect(run.result.bridged_Ah).toBeGreaterThan(0);
    expect(Math.abs(run.result.capacity_Ah - truthAh)).toBeLessThan(
      run.result.uncertainty.capacity_Ah.expanded,
    );
  });
});
