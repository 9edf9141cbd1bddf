import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { daemonOnRig, finishedRun, runEvents, type FinishedRun } from './daemon-on-rig.js';
import {
  startEmulatedRig,
  waitUntil,
  type EmulatedRig,
  type HarnessTruth,
} from './emulated-rig.js';

// The firmware hangs mid-discharge with interrupts off (the harness sends its program counter
// into a loop); the chip's hardware watchdog (about 0.5 s: 2^16 cycles of its 128 kHz
// oscillator, ATmega328P datasheet, from memory) resets it, which drops the load pin; the
// firmware reports the cause after boot. The host logs it, sees the rig restart with its load
// off, and runs the precheck again before switching back on; SIGTERM then ends the run.
describe('reference firmware on an emulated chip: a hung firmware is reset by the watchdog', () => {
  let rig: EmulatedRig;
  let run: FinishedRun<{ end_reason: string; load_off_confirmed: boolean }>;
  let truth: HarnessTruth;
  let events: { event: string; code?: string; to?: string }[];

  beforeAll(async () => {
    rig = await startEmulatedRig({ capacityMah: 200, soc: 0.9, seed: 51 });
    const on = daemonOnRig(rig);
    const d = on.start();
    const onStretches = (): number => rig.truth().channels[0].segments.filter((s) => s.load).length;
    await waitUntil(() => onStretches() === 1, 20_000, 'the load to go on');
    await new Promise((r) => setTimeout(r, 1500));
    rig.control('hang');
    await waitUntil(() => onStretches() === 2, 20_000, 'the host to switch on again');
    await new Promise((r) => setTimeout(r, 1000));
    d.child.kill('SIGTERM');
    run = await finishedRun(rig, on, d);
    truth = run.truth;
    events = runEvents(run.folder);
  }, 60_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('the watchdog reset the chip about 0.5 s after the hang, and the reset dropped the load pin', () => {
    expect(truth.resets).toHaveLength(1);
    const reset = truth.resets[0]!;
    expect(reset.cause).toBe('watchdog');
    expect(reset.at_ms - truth.hung_at_ms).toBeGreaterThan(490);
    expect(reset.at_ms - truth.hung_at_ms).toBeLessThan(530);
    const segs = truth.channels[0].segments;
    expect(segs.map((s) => s.load)).toEqual([false, true, false, true, false]);
    expect(reset.pins_driven_after_cycles).toBeLessThanOrEqual(11);
    // The hang itself leaves the pin as it was: only the reset lets go of it.
    expect(Math.abs(segs[2]!.from_ms - reset.at_ms)).toBeLessThan(0.01);
  });

  it('the host logged the reset cause and the restart, and checked the resting cell again before switching on', () => {
    const names = events.map((e) => e.event);
    const error = names.indexOf('rig_error');
    expect(events[error]!.code).toBe('RST_WDT');
    const restart = names.indexOf('rig_restart');
    const precheck = events.findIndex((e, k) => k > restart && e.to === 'precheck');
    const passed = names.indexOf('precheck_passed', precheck);
    expect(restart).toBeGreaterThan(0);
    expect(precheck).toBeGreaterThan(restart);
    expect(passed).toBeGreaterThan(precheck);
    // Off for the whole precheck: at least a second with the load off after the reset.
    const segs = truth.channels[0].segments;
    expect(segs[3]!.from_ms - segs[2]!.from_ms).toBeGreaterThan(1000);
  });

  it('SIGTERM then ends the run as stopped, exit code 0, the load off confirmed', () => {
    expect(run.exitCode, run.output).toBe(0);
    expect(run.result.end_reason).toBe('stopped');
    expect(run.result.load_off_confirmed).toBe(true);
    expect(truth.channels[0].load_on).toBe(false);
  });
});
