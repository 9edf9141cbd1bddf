import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { frameState } from '../../src/protocol/frame-state.js';
import { startCcRig, spread, type CcRig } from './cc-rig.js';
import { waitUntil } from './emulated-rig.js';

// The CC variant of the reference firmware on the emulated chip, spoken to in protocol 1.1 over
// its pseudo-terminal. A host holds a constant current the way a calibrated rig does: it learns
// counts → true amps from two steady points (a least-squares line through two points is the
// line through them), asks for the count of the current it wants, and the firmware's trim holds
// the measured count there while the analog loop holds the current. Li-ion end of discharge
// 3.0 V per cell (common practice).
const WANT_A = 0.3;
const SPEED = 2;
const END_V = 3.0;

interface Hold {
  raw: number;
  trueA: number;
}

describe('reference firmware (CC variant) on an emulated chip: constant-current discharge', () => {
  let rig: CcRig;
  const refusals: Record<string, string> = {};
  let guardError: unknown;
  const holds: Hold[] = [];
  let target = 0;
  const during: number[] = [];
  let framesFrom = 0;
  let framesTo = 0;
  let notHeld = '';

  const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));
  /** The truth's present current, once per emulated 100 ms, for `emuMs`. */
  const sampleTruth = async (emuMs: number): Promise<number[]> => {
    const out: number[] = [];
    const end = rig.truth().emulated_ms + emuMs;
    let last = -1;
    for (;;) {
      const t = rig.truth();
      if (t.emulated_ms >= end) return out;
      if (t.emulated_ms !== last) out.push(t.channels[0].load_A);
      last = t.emulated_ms;
      await sleep(20);
    }
  };
  const hold = async (raw: number): Promise<Hold> => {
    rig.send({ command: 'ISET', channel: 0, raw });
    await sleep(2000 / SPEED); // the trim settles within a second of emulated time
    const from = rig.heard.length;
    const trueA = spread(await sampleTruth(1500)).mean;
    const measured = spread(rig.frames(0, from).map((f) => f.iRaw)).mean;
    return { raw: measured, trueA };
  };

  beforeAll(async () => {
    rig = await startCcRig({ speed: SPEED, capacityMah: 2.5, soc: 0.95, seed: 11 });
    rig.beat(true, 150);
    for (const [name, payload] of [
      ['setpoint', 'C,MODE,0,D'],
      ['power', 'C,PSET,0,100'],
      ['range', 'C,ISET,0,5000'],
      ['mode', 'C,MODE,0,X'],
    ] as const) {
      const from = rig.heard.length;
      rig.sendRaw(payload);
      refusals[name] = await rig.awaitLine(from, /^[AE],/, `the answer to ${payload}`);
    }
    try {
      rig.send({ command: 'ISET', channel: 0, raw: 5000 });
    } catch (e) {
      guardError = e;
    }
    rig.send({ command: 'ISET', channel: 0, raw: 200 });
    rig.send({ command: 'MODE', channel: 0, mode: 'discharge' });
    holds.push(await hold(200), await hold(700));
    const [p, q] = holds as [Hold, Hold];
    const perCount = (q.trueA - p.trueA) / (q.raw - p.raw);
    target = Math.round(p.raw + (WANT_A - p.trueA) / perCount);
    rig.send({ command: 'ISET', channel: 0, raw: target });
    await sleep(2000 / SPEED);
    framesFrom = rig.heard.length;
    let last = -1;
    await waitUntil(
      () => {
        const t = rig.truth();
        if (t.emulated_ms !== last) during.push(t.channels[0].load_A);
        last = t.emulated_ms;
        return t.channels[0].terminal_V < END_V;
      },
      120_000,
      'the cell to reach 3.0 V',
    );
    framesTo = rig.heard.length;
    // A current the cell can no longer drive through the 2.2 Ω ballast: the trim runs to its bound.
    rig.send({ command: 'ISET', channel: 0, raw: 2900 });
    notHeld = await rig.awaitLine(framesTo, /^D,0,(\d+,){5}25\|/, 'a frame with bit 5', 8000);
    rig.send({ command: 'MODE', channel: 0, mode: 'rest' });
    await sleep(500);
  }, 200_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('states its capabilities after the hello: a constant-current load with its range, and a charger', () => {
    expect(rig.caps).toMatchObject({
      protocol: '1.1',
      channels: [
        { load: 'constant_current', iMinRaw: 24, iMaxRaw: 3000, charger: true },
        { load: 'constant_current', charger: true },
      ],
    });
  });

  it('refuses with an E line what it cannot do, and the host guard refuses before sending', () => {
    expect(refusals.setpoint).toMatch(/^E,SETPOINT,/);
    expect(refusals.power).toMatch(/^E,CAPABLE,/);
    expect(refusals.range).toMatch(/^E,RANGE,/);
    expect(refusals.mode).toMatch(/^E,RANGE,/);
    expect(guardError).toMatchObject({ code: 'CV_RIG_INCAPABLE' });
  });

  it('the emulated chip kept up with real time (pacing)', () => {
    expect(rig.truth().pace.max_lag_ms).toBeLessThan(1000);
  });

  // Tolerance: one count of the current input is about 0.9 mA of true current here; the trim
  // takes a quarter of each frame's error, which averages the reading's noise of about one
  // count to a third of one, and the dithered PWM resolves 1/256 of a 12-count step. So the
  // true current stays within ±2 counts (±1.8 mA, 0.6 % of 0.3 A) of the mean, and the mean
  // within ±0.5 % of the wanted current (the two-point calibration's own noise).
  it('holds the true current within ±0.6 % of 0.3 A across the discharge to 3.0 V', () => {
    expect(during.length).toBeGreaterThan(50);
    const s = spread(during);
    console.log(
      `constant current: ${during.length} truth samples, mean ${(s.mean * 1000).toFixed(3)} mA, ` +
        `min ${(s.min * 1000).toFixed(3)}, max ${(s.max * 1000).toFixed(3)}; setpoint ${target} counts; ` +
        `holds ${JSON.stringify(holds)}; lag ${rig.truth().pace.max_lag_ms} ms`,
    );
    expect(Math.abs(s.mean - WANT_A) / WANT_A).toBeLessThan(0.005);
    expect(s.max - WANT_A).toBeLessThan(0.0018);
    expect(WANT_A - s.min).toBeLessThan(0.0018);
  });

  it('the frames say constant-current discharge, and their mean count sits on the setpoint', () => {
    const after = rig.frames(0, framesTo).length;
    const frames = rig.frames(0, framesFrom).slice(0, -after || undefined);
    expect(frames.length).toBeGreaterThan(50);
    for (const f of frames) {
      expect(f.flags).toBe(0x05);
      expect(frameState(f.flags)).toMatchObject({
        mode: 'discharge',
        regulation: 'constant_current',
        direction: 'out_of_cell',
      });
    }
    const mean = spread(frames.map((f) => f.iRaw)).mean;
    expect(Math.abs(mean - target)).toBeLessThan(0.5);
  });

  it('says when the setpoint is not held: a current the cell cannot drive sets flag bit 5', () => {
    expect(notHeld).toMatch(/,25\|/);
    expect(frameState(0x25)).toMatchObject({ setpointNotHeld: true });
  });

  it('the board errors are real: the nominal chain would have been several per cent off', () => {
    // 0.959 mA per count from the profile (5 V / 4096 / 50.9 / 25 mΩ); the truth differs by the
    // connection resistance and the offsets the host does not know.
    const nominal = (target * 5) / 4096 / 50.9 / 0.025;
    expect(Math.abs(nominal - WANT_A) / WANT_A).toBeGreaterThan(0.02);
  });
});
