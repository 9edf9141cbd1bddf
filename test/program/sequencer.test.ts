import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { parseProgram } from '../../src/program/program-file.js';
import { planProgram } from '../../src/program/program-plan.js';
import type {
  ChannelMode,
  ProgramFrame,
  SequencerUpdate,
} from '../../src/program/sequence-types.js';
import { ProgramSequencer } from '../../src/program/sequencer.js';

const liIon = findChemistry(loadChemistries(), 'li-ion');

/** A one-cell Li-ion plan of 2.5 Ah from program text. */
function plan(steps: string, ratedAh = 2.5) {
  return planProgram(parseProgram(`name: t\nsteps:\n${steps}`, 't.yaml'), {
    profile: liIon,
    cells: 1,
    ratedAh,
    where: 't.yaml',
  });
}

const frame = (
  t_s: number,
  voltageV: number,
  currentA: number,
  mode: ChannelMode,
  temperatureC: number | null = 25,
): ProgramFrame => ({ t_ms: Math.round(t_s * 1000), voltageV, currentA, temperatureC, mode });

/** Feeds frames until the sequencer reports an end; returns that update and its time. */
function runUntilEnd(
  seq: ProgramSequencer,
  frameAt: (t: number) => ProgramFrame,
  fromS: number,
  toS: number,
): { u: SequencerUpdate; t: number } {
  for (let t = fromS; t <= toS; t++) {
    const u = seq.onFrame(frameAt(t));
    if (u.ended.length > 0) return { u, t };
  }
  throw new Error('no end');
}

describe('CC-CV charge of a 2.5 Ah Li-ion cell at 0.5 C to 4.2 V, ended at 0.05 C', () => {
  // Common practice: CC-CV to 4.20 V, CV phase ended when the current falls to 0.05 C.
  // Hand-worked: 0.5 C = 1.25 A, 0.05 C = 0.125 A. CC for 3000 s, then in CV the current decays
  // as 1.25·exp(-(t-3000)/1800): it reaches 0.125 A at 3000 + 1800·ln 10 = 7144.6 s, so the
  // first frame at or under it is t = 7145 s; held 10 s, the segment ends at t = 7155 s.
  const model = (t: number): ProgramFrame =>
    t < 3000
      ? frame(t, 3.7 + (0.5 * t) / 3000, -1.25, 'charge')
      : frame(t, 4.2, -1.25 * Math.exp(-(t - 3000) / 1800), 'charge');

  it('asks for 1.25 A at 4.2 V and ends on the termination current at 7155 s', () => {
    const seq = new ProgramSequencer(plan('  - charge: { until: cc-cv, current_C: 0.5 }\n'));
    const first = seq.onFrame(frame(0, 3.7, 0, 'rest'));
    expect(first.intents).toEqual([
      { type: 'set-charge', currentA: 1.25, voltageV: 4.2 },
      { type: 'set-mode', mode: 'charge' },
    ]);
    const { u, t } = runUntilEnd(seq, model, 1, 20000);
    expect(t).toBe(7155);
    expect(u.ended[0]).toMatchObject({
      index: 0,
      kind: 'charge',
      end_reason: 'termination_current',
      started_ms: 0,
      ended_ms: 7_155_000,
    });
    expect(u.finished).toEqual({ aborted: false, reason: 'complete' });
    expect(u.intents).toEqual([{ type: 'set-mode', mode: 'rest' }]);
  });

  it('a current under 0.125 A during the CC phase (below the CV band) does not end it', () => {
    const seq = new ProgramSequencer(plan('  - charge: { until: cc-cv, current_C: 0.5 }\n'));
    seq.onFrame(frame(0, 3.7, 0, 'rest'));
    // 4.17 V is below 4.2 × (1 − 0.5 %) = 4.179 V: the cell is not yet at its CV voltage
    for (let t = 1; t < 100; t++)
      expect(seq.onFrame(frame(t, 4.17, -0.05, 'charge')).ended).toEqual([]);
  });
});

describe('charge safety ends', () => {
  const charge =
    '  - charge: { until: cc-cv, current_C: 0.5, timeout_h: 2 }\n  - rest: { minutes: 10 }\n';

  it('a charge that never terminates aborts on its 2 h timeout, channel to rest, no rest step after', () => {
    const seq = new ProgramSequencer(plan(charge));
    seq.onFrame(frame(0, 3.7, 0, 'rest'));
    const { u, t } = runUntilEnd(seq, (s) => frame(s, 4.1, -1.25, 'charge'), 1, 10000);
    expect(t).toBe(7200);
    expect(u.ended[0]!.end_reason).toBe('charge_timeout');
    expect(u.finished).toEqual({ aborted: true, reason: 'charge_timeout' });
    expect(u.intents).toEqual([{ type: 'set-mode', mode: 'rest' }]);
    expect(u.started).toBeNull();
    expect(seq.state).toBe('aborted');
  });

  it('over 45 °C during charge aborts (Li-ion charge window 0–45 °C, common practice)', () => {
    const seq = new ProgramSequencer(plan(charge));
    seq.onFrame(frame(0, 3.7, 0, 'rest'));
    expect(seq.onFrame(frame(1, 3.9, -1.25, 'charge', 45)).ended).toEqual([]);
    const u = seq.onFrame(frame(2, 3.9, -1.25, 'charge', 45.1));
    expect(u.ended[0]!.end_reason).toBe('over_temperature');
    expect(u.finished?.aborted).toBe(true);
  });

  it('a charge is never switched on below 0 °C or without a temperature', () => {
    for (const [temp, why] of [
      [-1, 'under_temperature'],
      [null, 'temperature_unknown'],
    ] as const) {
      const seq = new ProgramSequencer(plan(charge));
      const u = seq.onFrame(frame(0, 3.7, 0, 'rest', temp));
      expect(u.intents).toEqual([{ type: 'set-mode', mode: 'rest' }]);
      expect(u.ended[0]!.end_reason).toBe(why);
    }
  });

  it('above 4.2 V × 1.01 = 4.242 V the charge aborts (common practice ceiling with 1 % slack)', () => {
    const seq = new ProgramSequencer(plan(charge));
    seq.onFrame(frame(0, 3.7, 0, 'rest'));
    expect(seq.onFrame(frame(1, 4.24, -1, 'charge')).ended).toEqual([]);
    expect(seq.onFrame(frame(2, 4.25, -1, 'charge')).ended[0]!.end_reason).toBe('over_voltage');
  });

  it('a rig that does not take the commanded mode within 5 s aborts the program', () => {
    const seq = new ProgramSequencer(plan('  - discharge: { current_C: 0.2 }\n'));
    seq.onFrame(frame(0, 4.1, 0, 'rest'));
    expect(seq.onFrame(frame(4, 4.1, 0, 'rest')).ended).toEqual([]);
    expect(seq.onFrame(frame(5, 4.1, 0, 'rest')).ended[0]!.end_reason).toBe('mode_not_confirmed');
  });
});

describe('rest and discharge ends', () => {
  it('rest 60 min ends at 3600 s and the discharge at 0.2 C (0.5 A) starts on the same frame', () => {
    const seq = new ProgramSequencer(
      plan('  - rest: { minutes: 60 }\n  - discharge: { current_C: 0.2 }\n'),
    );
    expect(seq.onFrame(frame(0, 4.15, 0, 'rest')).intents).toEqual([
      { type: 'set-mode', mode: 'rest' },
    ]);
    const { u, t } = runUntilEnd(seq, (s) => frame(s, 4.15, 0, 'rest'), 1, 5000);
    expect(t).toBe(3600);
    expect(u.ended[0]!.end_reason).toBe('rest_time');
    expect(u.started).toMatchObject({ index: 1, kind: 'discharge' });
    expect(u.intents).toEqual([
      { type: 'set-load', load: { type: 'constant_current', A: 0.5 } },
      { type: 'set-mode', mode: 'discharge' },
    ]);
  });

  it('a rest until the voltage settles to 0.5 mV/min ends at 2244 s (hand-worked)', () => {
    // V = 3.5 + 0.2·(1 − e^(−t/600)); the mean slope over the last 60 s is
    // 0.2·e^(−t/600)·(e^0.1 − 1)/60 V/s; ≤ 0.5 mV/min = 8.333e-6 V/s from t = 2243.6 s.
    const seq = new ProgramSequencer(
      plan('  - rest: { settle_mV_per_min: 0.5, max_minutes: 240 }\n'),
    );
    const v = (t: number): number => 3.5 + 0.2 * (1 - Math.exp(-t / 600));
    seq.onFrame(frame(0, v(0), 0, 'rest'));
    const { u, t } = runUntilEnd(seq, (s) => frame(s, v(s), 0, 'rest'), 1, 20000);
    expect(t).toBe(2244);
    expect(u.ended[0]!.end_reason).toBe('voltage_settled');
  });

  it('a discharge ends at the cutoff, 3.0 V for Li-ion by default (common practice)', () => {
    const seq = new ProgramSequencer(plan('  - discharge: { current_C: 0.2 }\n'));
    seq.onFrame(frame(0, 4.1, 0, 'rest'));
    expect(seq.onFrame(frame(1, 3.01, 0.5, 'discharge')).ended).toEqual([]);
    const u = seq.onFrame(frame(2, 3.0, 0.5, 'discharge'));
    expect(u.ended[0]!.end_reason).toBe('cutoff');
    expect(u.finished).toEqual({ aborted: false, reason: 'complete' });
  });

  it('storage from above 3.8 V is a 0.5 C discharge down to 3.8 V (Li-ion storage, common practice)', () => {
    const seq = new ProgramSequencer(plan('  - storage: {}\n'));
    const u0 = seq.onFrame(frame(0, 4.0, 0, 'rest'));
    expect(u0.started).toMatchObject({ kind: 'discharge', purpose: 'storage' });
    expect(u0.intents[0]).toEqual({
      type: 'set-load',
      load: { type: 'constant_current', A: 1.25 },
    });
    expect(seq.onFrame(frame(10, 3.8, 1.25, 'discharge')).ended[0]!.end_reason).toBe(
      'storage_voltage',
    );
  });

  it('stop ends the running segment as stopped and rests the channel', () => {
    const seq = new ProgramSequencer(plan('  - rest: { minutes: 60 }\n'));
    seq.onFrame(frame(0, 4.0, 0, 'rest'));
    const u = seq.stop(1000);
    expect(u.ended[0]).toMatchObject({ end_reason: 'stopped', ended_ms: 1000 });
    expect(seq.onFrame(frame(2, 4.0, 0, 'rest'))).toEqual({
      intents: [],
      ended: [],
      started: null,
      finished: null,
    });
  });
});

describe('nickel charges, ended by the charger or by time', () => {
  const nimh = findChemistry(loadChemistries(), 'nimh');
  const nimhPlan = (steps: string) =>
    planProgram(parseProgram(`name: n\nrated_Ah: 2\nsteps:\n${steps}`, 'n.yaml'), {
      profile: nimh,
      cells: 1,
      where: 'n.yaml',
    });

  it('a charger that drops to a C/40 trickle at 7000 s has ended, held 10 s: 7010 s (common practice)', () => {
    // 0.5 C of 2 Ah = 1 A; ended at or below 0.05 C = 0.1 A; C/40 = 0.05 A
    const seq = new ProgramSequencer(nimhPlan('  - charge: { until: charger, current_C: 0.5 }\n'));
    seq.onFrame(frame(0, 1.3, 0, 'rest'));
    const { u, t } = runUntilEnd(
      seq,
      (s) => frame(s, 1.45, s < 7000 ? -1 : -0.05, 'charge'),
      1,
      20000,
    );
    expect(t).toBe(7010);
    expect(u.ended[0]!.end_reason).toBe('charger_ended');
  });

  it('0.1 It for 16 h ends on its time at 57600 s, not as a timeout (IEC 61951-2, from memory)', () => {
    const seq = new ProgramSequencer(
      nimhPlan('  - charge: { until: time, hours: 16, current_C: 0.1 }\n'),
    );
    expect(seq.onFrame(frame(0, 1.3, 0, 'rest')).intents[0]).toEqual({
      type: 'set-charge',
      currentA: 0.2,
      voltageV: 1.6,
    });
    const { u, t } = runUntilEnd(seq, (s) => frame(s, 1.45, -0.2, 'charge'), 1, 60000);
    expect(t).toBe(57600);
    expect(u.ended[0]!.end_reason).toBe('charge_time');
    expect(u.finished).toEqual({ aborted: false, reason: 'complete' });
  });
});
