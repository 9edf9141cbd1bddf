import { describe, expect, it } from 'vitest';
import {
  CUTOFF_HOLD_FRAMES,
  CUTOFF_HOLD_MS,
  Limits,
  type LimitInput,
} from '../../src/session/limits.js';

// One Li-ion cell: cutoff 3.0 V, floor 2.5 V, 60 °C (config/chemistries.yaml, common practice).
function limits(): Limits {
  return new Limits({ cutoffV: 3.0, floorV: 2.5, maxTemperatureC: 60, maxCurrentA: 5 });
}

function frame(atMs: number, volts: number): LimitInput {
  return { atMs, volts, amps: 1, celsius: 25, thermistor: 'ok', loadOn: true, rigFault: false };
}

/** Feeds frames every `stepMs` from `volts(k)` until a trip; the frame index and the trip. */
function feed(l: Limits, stepMs: number, volts: (k: number) => number) {
  for (let k = 0; k < 1000; k++) {
    const trip = l.check(frame(k * stepMs, volts(k)));
    if (trip) return { k, trip };
  }
  return null;
}

describe('cutoff hold', () => {
  it('is short and bounded: at 10 frames/s the load goes off on the 6th frame below the cutoff', () => {
    const r = feed(limits(), 100, () => 2.9);
    expect(r?.k).toBe(CUTOFF_HOLD_MS / 100);
    expect(r?.trip.reason).toBe('cutoff');
  });

  it('needs 3 consecutive frames even when frames are slow (one noisy frame ends nothing)', () => {
    const r = feed(limits(), 1000, () => 2.9);
    expect(r?.k).toBe(CUTOFF_HOLD_FRAMES - 1);
  });

  it('says what happened: fell below the cutoff for N frames / X s, with the last reading', () => {
    const r = feed(limits(), 100, () => 2.95);
    expect(r?.trip.detail).toBe(
      'fell below the cutoff of 3.000 V for 6 frames / 0.5 s (last 2.950 V)',
    );
    expect(r?.trip.detail).not.toMatch(/held/);
  });

  it('never holds past the floor: a steep fall to the 2.5 V floor cuts on that frame', () => {
    // 3.05 V, then falling 0.2 V a frame: 2.85, 2.65, 2.45 — the hold would wait for 6 frames
    const r = feed(limits(), 100, (k) => 3.05 - 0.2 * k);
    expect(r?.k).toBe(3);
    expect(r?.trip.reason).toBe('cutoff');
    expect(r?.trip.detail).toMatch(
      /2\.450 V reached the safety floor of 2\.500 V: switched off at once/,
    );
  });

  it('a floor raised by an edited chemistry profile applies to the next frame', () => {
    const l = limits();
    l.setFloor(2.8);
    expect(l.check(frame(0, 2.79))?.detail).toMatch(/safety floor of 2\.800 V/);
  });

  it('no floor check with the load off (a resting cell recovers above the cutoff anyway)', () => {
    const l = limits();
    expect(l.check({ ...frame(0, 2.4), loadOn: false })).toBeNull();
  });
});
