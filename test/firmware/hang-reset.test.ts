import { readFileSync } from 'node:fs';
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

// The firmware hangs mid-discharge with interrupts off (the harness sends its program counter
// into a loop); the chip's hardware watchdog (about 0.5 s: 2^16 cycles of its 128 kHz
// oscillator, ATmega328P datasheet, from memory) resets it, which drops the load pin; the
// firmware reports the cause after boot and the host ends the run safely.
describe('reference firmware on an emulated chip: a hung firmware is reset by the watchdog', () => {
  let rig: EmulatedRig;
  let exitCode: number | null;
  let output = '';
  let folder: string;
  let result: { end_reason: string; end_detail: string; load_off_confirmed: boolean };
  let truth: HarnessTruth;

  beforeAll(async () => {
    rig = await startEmulatedRig({ capacityMah: 200, soc: 0.9, seed: 51 });
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
    await new Promise((r) => setTimeout(r, 1500));
    rig.control('hang');
    exitCode = await d.exit;
    output = d.stdout() + d.stderr();
    // The host is gone; 6 s more show that nothing switches the load on again.
    await new Promise((r) => setTimeout(r, 6000));
    truth = rig.truth();
    folder = onlyRunFolder(runs);
    result = readJson(join(folder, 'result.json'));
  }, 60_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('the watchdog reset the chip about 0.5 s after the hang, and the reset dropped the load pin', () => {
    expect(truth.resets).toHaveLength(1);
    const reset = truth.resets[0]!;
    expect(reset.cause).toBe('watchdog');
    const segs = truth.channels[0].segments;
    expect(segs.map((s) => s.load)).toEqual([false, true, false]);
    expect(reset.at_ms - truth.hung_at_ms).toBeGreaterThan(490);
    expect(reset.at_ms - truth.hung_at_ms).toBeLessThan(530);
    // The hang itself leaves the pin as it was: only the reset lets go of it.
    expect(Math.abs(segs[2]!.from_ms - reset.at_ms)).toBeLessThan(0.01);
  });

  it('the host heard the reset cause and ended the run as a rig fault, exit code 3, load off confirmed', () => {
    expect(exitCode, output).toBe(3);
    expect(result.end_reason).toBe('fault');
    expect(result.load_off_confirmed).toBe(true);
    const events = readFileSync(join(folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { event: string; detail?: { code?: string } });
    expect(events.some((e) => e.event === 'rig_error' && e.detail?.code === 'RST_WDT')).toBe(true);
  });
});
