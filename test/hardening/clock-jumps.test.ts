/**
 * The wall clock may step (NTP, a user changing the date); integrals run on the monotonic
 * clock only, and the wall clock is a label. A host suspend is a gap: flagged, counted, and its
 * charge reported as bridged rather than silently integrated.
 */
import { describe, expect, it } from 'vitest';
import { VirtualClock, type Clock, type TimerHandle } from '../../src/core/clock.js';
import type { LineOutcome, Pipeline } from '../../src/run/pipeline.js';
import type { Session } from '../../src/session/session.js';
import { formatSampleRow } from '../../src/sinks/sample-row.js';
import { BENCH_CHAIN, benchPipeline, dataLine, FRAME_MS, HEALTHY, warmUp } from './helpers.js';

const HOUR = 3_600_000;

/** A host clock whose wall time can be stepped while its monotonic time runs on evenly. */
class SteppingClock implements Clock {
  private readonly mono = new VirtualClock(0, Date.UTC(2026, 2, 29, 0, 30));
  private wallStep = 0;
  now(): number {
    return this.mono.now();
  }
  wallNow(): number {
    return this.mono.wallNow() + this.wallStep;
  }
  setTimer(fn: () => void, ms: number, repeat?: boolean): TimerHandle {
    return this.mono.setTimer(fn, ms, repeat);
  }
  clearTimer(h: TimerHandle): void {
    this.mono.clearTimer(h);
  }
  advance(ms: number): void {
    this.mono.advance(ms);
  }
  stepWall(ms: number): void {
    this.wallStep += ms;
  }
}

interface Fed {
  outcome: LineOutcome;
  wallMs: number;
}

/** Feeds one loaded frame every FRAME_MS on `clock`, as the daemon does: arrival = now(), label = wallNow(). */
function feed(
  p: Pipeline,
  clock: SteppingClock,
  seq: number,
  frames: number,
  beforeFrame: (k: number) => void = () => undefined,
): Fed[] {
  const out: Fed[] = [];
  for (let k = 0; k < frames; k++) {
    beforeFrame(k);
    clock.advance(FRAME_MS);
    const wallMs = clock.wallNow();
    const outcome = p.line(
      dataLine({ seq: seq + k, tickMs: (seq + k) * FRAME_MS, loadOn: true }),
      clock.now(),
      wallMs,
    );
    out.push({ outcome, wallMs });
  }
  return out;
}

function started(): {
  pipeline: Pipeline;
  session: Session;
  clock: SteppingClock;
  next: { seq: number; tick: number; at: number };
} {
  const { pipeline, session } = benchPipeline();
  const clock = new SteppingClock();
  const next = warmUp(pipeline, session);
  clock.advance(next.at - FRAME_MS);
  return { pipeline, session, clock, next };
}

describe('wall clock steps', () => {
  it('+3 h and −5 h mid-run change no integral, and wall_time follows the wall clock', () => {
    const FRAMES = 3000;
    const plain = started();
    const jumpy = started();
    const a = feed(plain.pipeline, plain.clock, plain.next.seq, FRAMES);
    const b = feed(jumpy.pipeline, jumpy.clock, jumpy.next.seq, FRAMES, (k) => {
      if (k === 1000) jumpy.clock.stepWall(3 * HOUR);
      if (k === 2000) jumpy.clock.stepWall(-5 * HOUR);
    });

    for (let k = 0; k < FRAMES; k++) {
      const x = a[k]!.outcome;
      const y = b[k]!.outcome;
      if (x.kind !== 'sample' || y.kind !== 'sample')
        throw new Error(`frame ${k} was not a sample`);
      expect(y.row.chargeAh).toBe(x.row.chargeAh);
      expect(y.row.energyWh).toBe(x.row.energyWh);
      expect(y.row.hostS).toBe(x.row.hostS);
      expect(y.gap).toBe(false);
      // The wall_time column is the wall clock at arrival, steps and all.
      expect(formatSampleRow(y.row).split(',')[1]).toBe(new Date(b[k]!.wallMs).toISOString());
    }
    expect(b[1000]!.wallMs - b[999]!.wallMs).toBe(3 * HOUR + FRAME_MS);
    expect(b[2000]!.wallMs - b[1999]!.wallMs).toBe(-5 * HOUR + FRAME_MS);
    expect(jumpy.session.integrator).toEqual(plain.session.integrator);
    expect(jumpy.pipeline.counters).toEqual(plain.pipeline.counters);
    expect(jumpy.session.state).toBe('discharging');

    // Charge is the time integral of current (physics): a constant current I held for t gives I·t,
    // here 1.33 A over the 299.9 s between the first and the last loaded frame of the run.
    const first = b[0]!.outcome;
    const last = b[FRAMES - 1]!.outcome;
    if (first.kind !== 'sample' || last.kind !== 'sample') throw new Error('not samples');
    const amps = BENCH_CHAIN.amps(HEALTHY.iRaw);
    expect(last.row.hostS - first.row.hostS).toBeCloseTo(((FRAMES - 1) * FRAME_MS) / 1000, 9);
    expect(last.row.chargeAh - first.row.chargeAh).toBeCloseTo(
      (amps * (last.row.hostS - first.row.hostS)) / 3600,
      12,
    );
  });
});

describe('host suspend', () => {
  it("a monotonic clock that stood still while the rig's tick ran on 10 minutes is a gap too", () => {
    // On Linux the monotonic clock (CLOCK_MONOTONIC, behind performance.now()) does not count
    // time spent suspended (clock_gettime(2), from memory); only the rig's tick shows it.
    const SLEEP_MS = 10 * 60_000;
    const run = started();
    const { pipeline: p, session: s, clock } = run;
    let seq = run.next.seq;
    const one = (skipped: number, flags: number): LineOutcome => {
      clock.advance(FRAME_MS);
      seq += skipped;
      const o = p.line(
        dataLine({ seq, tickMs: seq * FRAME_MS, loadOn: (flags & 1) !== 0, flags }),
        clock.now(),
        clock.wallNow(),
      );
      seq++;
      return o;
    };
    for (let k = 0; k < 100; k++) one(0, 1);
    const before = s.integrator.chargeAh;
    const back = one(SLEEP_MS / FRAME_MS, 0x02);
    expect(back.kind === 'sample' && back.gap).toBe(true);
    expect(p.counters.lost).toBe(SLEEP_MS / FRAME_MS);
    // Host time moved one frame period only, so at most one period of charge was added, all of it bridged.
    expect(s.integrator.chargeAh - before).toBeLessThanOrEqual(
      ((BENCH_CHAIN.amps(HEALTHY.iRaw) * FRAME_MS) / HOUR) * (1 + 1e-12),
    );
    expect(s.integrator.bridgedAh).toBeCloseTo(s.integrator.chargeAh - before, 15);
  });

  it('10 minutes asleep is flagged as one gap, the lost frames are counted, and no charge is invented across it', () => {
    const SLEEP_MS = 10 * 60_000;
    const run = started();
    const steps: { dAh: number; dBridged: number; gap: boolean }[] = [];
    const { pipeline: p, session: s, clock } = run;
    let seq = run.next.seq;
    const one = (extraMs: number, skipped: number, flags: number): LineOutcome => {
      clock.advance(FRAME_MS + extraMs);
      seq += skipped;
      const before = { ah: s.integrator.chargeAh, bridged: s.integrator.bridgedAh };
      const o = p.line(
        dataLine({ seq, tickMs: seq * FRAME_MS, loadOn: (flags & 1) !== 0, flags }),
        clock.now(),
        clock.wallNow(),
      );
      seq++;
      steps.push({
        dAh: s.integrator.chargeAh - before.ah,
        dBridged: s.integrator.bridgedAh - before.bridged,
        gap: o.kind === 'sample' && o.gap,
      });
      return o;
    };
    for (let k = 0; k < 100; k++) one(0, 0, 1);
    // Asleep: the rig's tick runs on and the frames it sent meanwhile are lost. Its watchdog,
    // hearing no heartbeat, has cut the load: the first frame back reports load off and a rig fault.
    const back = one(SLEEP_MS, SLEEP_MS / FRAME_MS, 0x02);
    for (let k = 0; k < 20; k++) one(0, 0, 0x02);

    expect(back.kind).toBe('sample');
    if (back.kind !== 'sample') return;
    expect(back.gap).toBe(true);
    expect(back.lost).toBe(SLEEP_MS / FRAME_MS);
    expect(steps.filter((x) => x.gap)).toHaveLength(1);
    expect(p.counters.lost).toBe(SLEEP_MS / FRAME_MS);
    // The load was seen off after the gap: with no heartbeat the rig's watchdog cut it 5 s after
    // the last one it heard (protocol v1), so only the 4.75 s to that cut is bridged at the last
    // current, all of it as doubt (a trapezoid would credit half of ten minutes of current).
    const gapStep = steps[100]!;
    const cutAh = (BENCH_CHAIN.amps(HEALTHY.iRaw) * 4750) / HOUR;
    expect(gapStep.dAh).toBeCloseTo(cutAh, 6);
    expect(s.integrator.bridgedAh).toBeCloseTo(cutAh, 6);
  });
});
