import { describe, expect, it } from 'vitest';
import { Integrator } from '../../src/session/integrator.js';

/** Feeds samples of i(t), v(t) every `stepS` seconds from 0 to `totalS`. */
function integrate(
  totalS: number,
  stepS: number,
  amps: (t: number) => number,
  volts: (t: number) => number = () => 3.7,
  loadOn: (t: number) => boolean = () => true,
): Integrator {
  const integ = new Integrator();
  const n = Math.round(totalS / stepS);
  for (let k = 0; k <= n; k++) {
    const t = k * stepS;
    integ.add(k === 0 ? 0 : stepS * 1000, volts(t), amps(t), loadOn(t), false);
  }
  return integ;
}

describe('integrator: charge is the time integral of current (physics)', () => {
  it('1 A for 10 min is 1/6 Ah = 166.7 mAh (physics)', () => {
    const integ = integrate(600, 0.1, () => 1);
    expect(integ.chargeAh * 1000).toBeCloseTo(166.667, 3);
    expect(integ.chargeAh).toBeCloseTo(1 / 6, 12);
    expect(integ.onMs).toBeCloseTo(600_000, 6);
  });

  it('a linear ramp 0 -> 2 A over 1 h is exactly 1 Ah (∫ 2t/T dt = T; the trapezoid rule is exact for straight lines)', () => {
    const integ = integrate(3600, 1, (t) => (2 * t) / 3600);
    expect(integ.chargeAh).toBeCloseTo(1, 12);
  });

  it('an exponential decay matches its analytic integral I0·τ·(1 − e^(−T/τ)) within the trapezoid error bound', () => {
    // I0 = 2 A, τ = 1800 s, T = 3600 s, h = 1 s. Composite trapezoid rule error bound (numerical
    // analysis textbooks): |E| ≤ T·h²/12·max|I''| = 3600/12 · 2/1800² A·s.
    const i0 = 2;
    const tau = 1800;
    const integ = integrate(3600, 1, (t) => i0 * Math.exp(-t / tau));
    const exactAh = (i0 * tau * (1 - Math.exp(-3600 / tau))) / 3600;
    const boundAh = ((3600 / 12) * (i0 / tau ** 2)) / 3600;
    expect(Math.abs(integ.chargeAh - exactAh)).toBeLessThanOrEqual(boundAh);
    expect(Math.abs(integ.chargeAh - exactAh) / exactAh).toBeLessThan(1e-6);
  });

  it('a sine ripple on a DC current integrates to the DC part over whole periods (∫ sin over a period = 0; the trapezoid sum of a sampled sine over whole periods is 0 too)', () => {
    // 1.5 A + 0.5 A·sin(2πt/60 s) for 10 whole periods, sampled every 0.25 s
    const integ = integrate(600, 0.25, (t) => 1.5 + 0.5 * Math.sin((2 * Math.PI * t) / 60));
    expect(Math.abs(integ.chargeAh - (1.5 * 600) / 3600)).toBeLessThan(1e-9);
  });

  it('energy is ∫V·I dt: 3.7 V at 0.5 A for 2 h is 3.7 Wh (physics: P = V·I)', () => {
    const integ = integrate(
      7200,
      1,
      () => 0.5,
      () => 3.7,
    );
    expect(integ.energyWh).toBeCloseTo(3.7, 10);
    expect(integ.chargeAh).toBeCloseTo(1, 10);
  });

  it('energy with a voltage falling linearly 4.2 -> 3.0 V at 1 A for 1 h is the mean voltage times 1 Ah: 3.6 Wh', () => {
    const integ = integrate(
      3600,
      1,
      () => 1,
      (t) => 4.2 - (1.2 * t) / 3600,
    );
    expect(integ.energyWh).toBeCloseTo(3.6, 10);
  });

  it('current counts only while the load flag is on: an offset with the load off adds nothing', () => {
    const off = integrate(
      600,
      1,
      () => 0.033,
      () => 3.7,
      () => false,
    );
    expect(off.chargeAh).toBe(0);
    expect(off.energyWh).toBe(0);
    expect(off.onMs).toBe(0);
    // on for the middle 10 minutes of 30: 1 A for 600 s; each switching step counts half
    const mixed = integrate(
      1800,
      1,
      () => 1,
      () => 3.7,
      (t) => t >= 600 && t < 1200,
    );
    expect(mixed.chargeAh).toBeCloseTo(600 / 3600, 12);
    expect(mixed.onMs).toBe(600_000);
  });

  it('onMs follows the load flag, not the current: a switching step counts half even at 0 A', () => {
    const integ = new Integrator();
    integ.add(0, 3.7, 0, true, false);
    integ.add(1000, 3.7, 0, true, false);
    integ.add(1000, 3.7, 0, false, false);
    expect(integ.onMs).toBe(1500);
  });

  it('a flagged gap is integrated but booked as bridged charge', () => {
    const integ = new Integrator();
    integ.add(0, 3.7, 1, true, false);
    integ.add(1000, 3.7, 1, true, false);
    integ.add(5000, 3.7, 1, true, true);
    expect(integ.chargeAh).toBeCloseTo(6 / 3600, 12);
    expect(integ.bridgedAh).toBeCloseTo(5 / 3600, 12);
  });

  // Protocol v1: a rig that hears no heartbeat for 5 s cuts its load; heartbeats every 0.5 s.
  it('a long gap from load on to load off bridges the last current to the watchdog cut (4.75 s), in full as doubt', () => {
    const integ = new Integrator();
    integ.add(0, 3.7, 1.2, true, false);
    expect(integ.add(9000, 3.6, 0, false, true)).toBe(true);
    expect(integ.cut.ms).toBe(4750);
    expect(integ.chargeAh).toBeCloseTo((1.2 * 4.75) / 3600, 12);
    expect(integ.bridgedAh).toBeCloseTo(integ.chargeAh, 12);
    expect(integ.onMs).toBe(4750);
    // A shorter gap: the whole of it.
    const short = new Integrator();
    short.add(0, 3.7, 1, true, false);
    short.add(3000, 3.7, 0, false, true);
    expect(short.chargeAh).toBeCloseTo(3 / 3600, 12);
    // The link gone for good: bridged once; a frame after it adds nothing more.
    const gone = new Integrator();
    gone.add(0, 3.7, 1, true, false);
    expect(gone.bridgeToCut()?.ms).toBe(4750);
    expect(gone.bridgeToCut()).toBeNull();
    expect(gone.add(60_000, 3.7, 0, false, true)).toBe(false);
    expect(gone.chargeAh).toBeCloseTo(4.75 / 3600, 12);
  });

  it('a zero or negative time step adds nothing', () => {
    const integ = new Integrator();
    integ.add(0, 3.7, 1, true, false);
    integ.add(0, 3.7, 1, true, false);
    integ.add(-5, 3.7, 1, true, false);
    expect(integ.chargeAh).toBe(0);
    expect(integ.energyWh).toBe(0);
    expect(integ.onMs).toBe(0);
  });

  it('restore continues from saved totals and starts a new segment', () => {
    const integ = new Integrator();
    integ.restore({ chargeAh: 1, energyWh: 3.7, onMs: 3_600_000, bridgedAh: 0.01 });
    integ.add(3_600_000, 3.7, 1, true, false); // first frame after a resume: no interval yet
    expect(integ.chargeAh).toBe(1);
    integ.add(3_600_000, 3.7, 1, true, false);
    expect(integ.chargeAh).toBeCloseTo(2, 12);
    expect(integ.energyWh).toBeCloseTo(7.4, 12);
    expect(integ.onMs).toBe(7_200_000);
    expect(integ.bridgedAh).toBe(0.01);
  });
});

describe('integrator: the windows in which the load switched, for the uncertainty budget', () => {
  it('a switch between two frames is placed mid-step (half the step), one at the end or switched on across a gap anywhere in its window (all of it)', () => {
    const integ = new Integrator();
    integ.add(0, 3.7, 0, false, false);
    // On between two frames 100 ms apart at 2 A: a = 2 A × 50 ms = 0.1 A·s = 0.1/3600 Ah.
    integ.add(100, 3.7, 2, true, false);
    integ.add(100, 3.6, 1.5, true, false);
    // Off acknowledged 6 ms after the last frame at 1.5 A: a = 1.5 A × 6 ms = 0.009/3600 Ah.
    integ.offAfterLast(6);
    const s = integ.switches;
    expect(s.count).toBe(2);
    expect(s.widestMs).toBe(100);
    expect(s.sumSqHalfWidthAh).toBeCloseTo((0.1 / 3600) ** 2 + (0.009 / 3600) ** 2, 18);

    // Off across a 3 s gap at 1 A: the load drew until the rig's watchdog cut it, bridged in
    // full as doubt (which covers when it switched), so no switch window is added.
    const gap = new Integrator();
    gap.add(0, 3.7, 1, true, false);
    gap.add(3000, 3.7, 0, false, true);
    expect(gap.bridgedAh).toBeCloseTo(3 / 3600, 15);
    expect(gap.switches.count).toBe(0);

    // On across a 3 s gap at 1 A: switched on anywhere in it; the integral counts none of the
    // gap, a = 1 A × 3 s = 3/3600 Ah.
    const on = new Integrator();
    on.add(0, 3.7, 0, false, false);
    on.add(3000, 3.7, 1, true, true);
    expect(on.chargeAh).toBe(0);
    expect(on.switches.sumSqHalfWidthAh).toBeCloseTo((3 / 3600) ** 2, 15);
  });

  it('a steady load and a load that was already off add no switch', () => {
    const steady = integrate(10, 0.1, () => 1);
    steady.offAfterLast(0);
    expect(steady.switches.count).toBe(0);
    const off = integrate(
      10,
      0.1,
      () => 0,
      undefined,
      () => false,
    );
    off.offAfterLast(5);
    expect(off.switches).toEqual({ count: 0, sumSqHalfWidthAh: 0, widestMs: 0 });
  });
});
