import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { frameState } from '../../src/protocol/frame-state.js';
import { startCcRig, type CcRig, type CcTruth } from './cc-rig.js';
import { waitUntil } from './emulated-rig.js';

// The CC variant's charger pins on the emulated chip, in protocol 1.1. The charger module of the
// harness charges at a constant current (20 mA) up to 4.20 V, the usual Li-ion charge voltage
// (common practice), holds that voltage, and stops when the current falls under 2 mA (a tenth
// of the charge current: a common practice for the termination current).
const CHARGE_A = 0.02;
const CHARGE_V = 4.2;
const TERM_A = 0.002;
const SPEED = 2;
/** The protocol's heartbeat timeout (docs/protocol.md) and the firmware's watchdog period. */
const BEAT_TIMEOUT_MS = 5000;
const WATCHDOG_MS = 500;

describe('reference firmware (CC variant) on an emulated chip: charging', () => {
  let rig: CcRig;
  let afterCharge: CcTruth;
  let hostChargeAh = 0;
  let chargeFlags = new Set<number>();
  let invalid: string[] = [];
  let beatLost = '';
  let afterBeat: CcTruth;
  let afterHang: CcTruth;
  const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

  beforeAll(async () => {
    rig = await startCcRig({
      speed: SPEED,
      capacityMah: 1,
      soc: 0.75,
      internalOhm: 2,
      chargeMa: CHARGE_A * 1000,
      chargeV: CHARGE_V,
      termMa: TERM_A * 1000,
      seed: 23,
    });
    rig.beat(true, 150);
    // 1. A full charge on channel 0 until the charger terminates by itself.
    const from = rig.heard.length;
    rig.send({ command: 'MODE', channel: 0, mode: 'charge' });
    await waitUntil(
      () => rig.truth().channels[0].charge_phase === 'done',
      150_000,
      'the charger to terminate',
    );
    await sleep(1000 / SPEED);
    const frames = rig.frames(0, from).filter((f) => (f.flags & 0x10) !== 0);
    chargeFlags = new Set(frames.map((f) => f.flags));
    // What a host integrates from the frames: the monitor's counts through the nominal chain
    // (5 V / 4096 per count, 1 V at the 20 mA programmed), over the rig's ticks.
    for (let k = 1; k < frames.length; k++) {
      const dt = (frames[k]!.tickMs - frames[k - 1]!.tickMs) / 3.6e6;
      hostChargeAh += ((frames[k - 1]!.iRaw * 5) / 4096 / 1.0) * CHARGE_A * dt;
    }
    rig.send({ command: 'MODE', channel: 0, mode: 'rest' });
    await sleep(300);
    afterCharge = rig.truth();

    // 2. Channel 1 flipped between discharge and charge, with no rest between.
    rig.send({ command: 'ISET', channel: 1, raw: 400 });
    for (let k = 0; k < 8; k++) {
      rig.send({ command: 'MODE', channel: 1, mode: k % 2 ? 'charge' : 'discharge' });
      await sleep(60);
    }
    rig.send({ command: 'MODE', channel: 1, mode: 'rest' });
    await sleep(300);
    invalid = rig.heard
      .map((h) => h.line)
      .filter((l) => l.startsWith('D,'))
      .flatMap((l) => {
        const flags = parseInt(l.slice(0, l.indexOf('|')).split(',')[7]!, 16);
        const s = frameState(flags);
        return 'invalid' in s ? [`${l}: ${s.invalid}`] : [];
      });

    // 3. Channel 1 charging, and the host falls silent: the rig must cut the charger.
    rig.beat(false);
    const quiet = rig.heard.length;
    rig.send({ command: 'MODE', channel: 1, mode: 'charge' });
    beatLost = await rig.awaitLine(quiet, /^E,BEAT_LOST/, 'the heartbeat cut', 10_000);
    await sleep(300);
    afterBeat = rig.truth();

    // 4. Channel 0 charging again, and the firmware hangs: the hardware watchdog resets the chip.
    rig.beat(true, 150);
    rig.send({ command: 'MODE', channel: 0, mode: 'charge' });
    await waitUntil(() => rig.truth().channels[0].charger_on, 5000, 'the charger on again');
    rig.control('hang');
    await waitUntil(() => rig.truth().resets.length > 0, 5000, 'the watchdog reset');
    await sleep(500);
    afterHang = rig.truth();
  }, 240_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('drives the setpoint and charger pins low within the first instructions after power-on (3-cycle jump, 2 cycles per cbi/sbi: ATmega328P instruction set, from memory)', () => {
    // The jump, the four load-pin instructions, then eight for PB2, PB3, PD4 and PD5.
    expect(afterCharge.boot_cc_pins_driven_after_cycles).toBeGreaterThan(0);
    expect(afterCharge.boot_cc_pins_driven_after_cycles).toBeLessThanOrEqual(3 + 12 * 2);
  });

  it('charges at constant current, then constant voltage, then terminates by itself', () => {
    const ch = afterCharge.channels[0];
    const phases = ch.segments.filter((s) => s.mode === 'charge').map((s) => s.phase);
    expect(phases).toEqual(['cc', 'cv', 'done']);
    const cc = ch.segments.find((s) => s.phase === 'cc')!;
    const cv = ch.segments.find((s) => s.phase === 'cv')!;
    expect(-cc.mean_A).toBeCloseTo(CHARGE_A, 6);
    expect(cv.mean_V).toBeLessThan(CHARGE_V + 1e-6);
    expect(cv.mean_V).toBeGreaterThan(CHARGE_V - 1e-3);
    expect(ch.charger_on).toBe(false);
    console.log(
      `charge: ${(ch.charged_Ah * 1000).toFixed(4)} mAh in by the truth, ` +
        `${(hostChargeAh * 1000).toFixed(4)} mAh from the frames; cc ${((cc.to_ms - cc.from_ms) / 1000).toFixed(1)} s, ` +
        `cv ${((cv.to_ms - cv.from_ms) / 1000).toFixed(1)} s; lag ${afterCharge.pace.max_lag_ms} ms`,
    );
  });

  it('the frames say charge, current into the cell, and carry the charge within the monitor error', () => {
    expect([...chargeFlags]).toEqual([0x18]);
    expect(frameState(0x18)).toMatchObject({ mode: 'charge', direction: 'into_cell' });
    // The monitor's gain is 2 % off on channel 0 (the harness's board error): the nominal
    // chain reads that much high, and integrating over the frame period adds a little.
    const truthAh = afterCharge.channels[0].charged_Ah;
    expect(Math.abs(hostChargeAh / truthAh - 1.02)).toBeLessThan(0.01);
  });

  it('never has a load and a charger on together, even when switched straight from one to the other', () => {
    expect(afterCharge.channels[0].both_on_ms).toBe(0);
    expect(afterHang.channels[1].both_on_ms).toBe(0);
    const modes = afterBeat.channels[1].segments.map((s) => s.mode);
    expect(modes.filter((m) => m === 'discharge').length).toBeGreaterThanOrEqual(4);
    expect(modes.filter((m) => m === 'charge').length).toBeGreaterThanOrEqual(4);
    expect(invalid).toEqual([]);
  });

  it('cuts the charger 5.000 to 5.010 s after the host fell silent (protocol heartbeat)', () => {
    expect(beatLost).toMatch(/^E,BEAT_LOST,/);
    const segs = afterBeat.channels[1].segments;
    const last = segs[segs.length - 1]!;
    const charge = segs[segs.length - 2]!;
    expect(charge.mode).toBe('charge');
    expect(last.mode).toBe('rest');
    expect(afterBeat.channels[1].charger_on).toBe(false);
    const silentFor = last.from_ms - afterBeat.link.last_host_byte_ms;
    expect(silentFor).toBeGreaterThan(BEAT_TIMEOUT_MS);
    expect(silentFor).toBeLessThan(BEAT_TIMEOUT_MS + 10);
  });

  it('a hung firmware leaves the charger on no longer than the watchdog period, and not after the reset', () => {
    const ch = afterHang.channels[0];
    expect(afterHang.resets[0]!.cause).toBe('watchdog');
    expect(ch.charger_on).toBe(false);
    const off = ch.segments[ch.segments.length - 1]!;
    expect(off.mode).toBe('rest');
    const onFor = off.from_ms - afterHang.hung_at_ms;
    expect(onFor).toBeGreaterThan(0);
    expect(onFor).toBeLessThan(WATCHDOG_MS * 1.5);
  });
});
