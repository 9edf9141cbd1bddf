import { describe, expect, it } from 'vitest';
import { decodeRigLine, encodeDataFrame } from '../../src/protocol/codec.js';
import { referenceLine } from '../protocol/reference-crc.js';
import { CHAIN, LineRig } from './bench-pipeline.js';

describe('pipeline: line -> codec -> time base -> chain -> calibration -> session', () => {
  it('a discharge through protocol lines: precheck, load on, 1 A-class current for 10 min, charge = ∫I dt (physics)', () => {
    const rig = new LineRig();
    rig.run(10_000, () => rig.session.state === 'discharging');
    expect(rig.session.state).toBe('discharging');
    const q0 = rig.session.integrator.chargeAh;
    rig.run(600_000);
    // The current the chain reads for the counts the rig sends (1 A rounded to a whole count).
    const amps = CHAIN.amps(Math.round(CHAIN.countsForAmps(1)));
    expect(Math.abs(amps - 1)).toBeLessThan(CHAIN.ampsPerCount);
    expect(rig.session.integrator.chargeAh - q0).toBeCloseTo((amps * 600) / 3600, 12);
    expect(rig.pipeline.counters).toMatchObject({ rejected: 0, lost: 0 });
    // Without a calibration the corrected and nominal integrals agree.
    expect(rig.pipeline.nominalAh).toBeCloseTo(rig.session.integrator.chargeAh, 12);
  });

  it('sample rows carry raw counts, converted values and the totals so far', () => {
    const rig = new LineRig();
    rig.run(10_000, () => rig.session.state === 'discharging');
    const out = rig.step();
    if (out.kind !== 'sample') throw new Error(out.kind);
    const d = decodeRigLine(rig.line({ seq: out.row.seq, tick: out.row.tickMs }), 12);
    if (!d.ok || d.message.kind !== 'data') throw new Error('bad frame');
    expect(out.row).toMatchObject({
      hostS: rig.t / 1000,
      channel: 0,
      vRaw: d.message.vRaw,
      iRaw: d.message.iRaw,
      flags: 1,
      volts: CHAIN.volts(d.message.vRaw),
      amps: CHAIN.amps(d.message.iRaw),
      chargeAh: rig.session.integrator.chargeAh,
      energyWh: rig.session.integrator.energyWh,
      state: 'discharging',
      calibrationId: 'none',
    });
    expect(out.row.celsius).toBeCloseTo(25, 1);
  });

  it('a sustained cutoff crossing ends the run through the whole chain', () => {
    const rig = new LineRig();
    rig.run(10_000, () => rig.session.state === 'discharging');
    rig.run(30_000);
    rig.cell = (_t, on) => ({ volts: on ? 2.95 : 3.3, amps: on ? 1 : 0, celsius: 25 });
    rig.run(10_000, () => rig.session.state === 'ended');
    expect(rig.session.result.reason).toBe('cutoff');
    expect(rig.loadOn).toBe(false);
  });

  it('counts rejected lines by reason, lost frames from seq gaps, and ignores other channels', () => {
    const rig = new LineRig();
    rig.run(2000);
    rig.feed('garbage');
    rig.feed(rig.line().replace(/\|..../, '|0000'));
    rig.feed(referenceLine('D,0,1,2'));
    rig.seq += 4; // four frames never arrive
    rig.run(500);
    const other = encodeDataFrame({
      channel: 3,
      seq: 1,
      tickMs: 1,
      vRaw: 1,
      iRaw: 1,
      tRaw: 1,
      flags: 1,
    }).trimEnd();
    expect(rig.feed(other)).toEqual({ kind: 'ignored' });
    const c = rig.pipeline.counters;
    expect(c.rejected).toBe(3);
    expect(c.rejectedBy).toMatchObject({ no_checksum: 1, field_count: 1 });
    expect((c.rejectedBy.bad_checksum ?? 0) + (c.rejectedBy.no_checksum ?? 0)).toBe(2);
    expect(c.lost).toBe(4);
    expect(c.otherChannel).toBe(1);
    expect(c.accepted).toBe(25);
  });

  it('acknowledgements reach the session; hello and rig errors become events', () => {
    const rig = new LineRig();
    rig.run(10_000, () => rig.session.state === 'discharging');
    expect(rig.feed(referenceLine('H,bench-a,1.4.2,12,1'))).toMatchObject({
      kind: 'message',
      event: { event: 'rig_hello', adc_bits: 12 },
    });
    expect(rig.feed(referenceLine('E,3,thermistor rail'))).toMatchObject({
      kind: 'message',
      event: { event: 'rig_error', code: '3' },
    });
    rig.session.requestStop(rig.t, 'test');
    const ack = rig.feed(referenceLine('A,LOAD,0,0'));
    expect(ack).toMatchObject({ kind: 'message', event: { event: 'rig_ack' } });
    if (ack.kind !== 'message') throw new Error(ack.kind);
    expect(ack.actions.some((a) => a.type === 'end')).toBe(true);
    expect(rig.session.state).toBe('ended');
  });

  it('a new corrector applies from the next frame and its id goes into the rows', () => {
    const rig = new LineRig();
    rig.run(10_000, () => rig.session.state === 'discharging');
    rig.pipeline.setCorrector({
      id: 'cal-test',
      voltage: (x) => x,
      current: (x) => 1.01 * x,
      temperature: (x) => x,
    });
    const out = rig.step();
    if (out.kind !== 'sample') throw new Error(out.kind);
    expect(out.row.calibrationId).toBe('cal-test');
    expect(out.row.amps).toBeCloseTo(1.01 * CHAIN.amps(out.row.iRaw), 12);
    expect(rig.pipeline.calibrationId).toBe('cal-test');
  });

  it('an open thermistor reads NaN °C and stops the run as a fault', () => {
    const rig = new LineRig();
    rig.run(10_000, () => rig.session.state === 'discharging');
    rig.tRaw = CHAIN.maxCount; // NTC to ground open: the input sits at the top rail
    const out = rig.step();
    if (out.kind !== 'sample') throw new Error(out.kind);
    expect(CHAIN.thermistorState(out.row.tRaw)).toBe('open');
    expect(out.row.celsius).toBeNaN();
    rig.run(2000, () => rig.session.state === 'ended');
    expect(rig.session.result.detail).toMatch(/thermistor_open/);
  });
});
