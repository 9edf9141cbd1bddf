import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseManifest } from '../../src/record/manifest.js';
import { readSegments } from '../../src/record/segments.js';
import { resolveRunConfig } from '../../src/run/run-config.js';
import { cell, PROGRAM, programRun } from './program-run-helper.js';

describe('a program run against a scripted protocol 1.1 rig', () => {
  // Charge is the time integral of current (physics): the rig's own integral of its true
  // current is the reference; the host's trapezoid over 500 ms frames of 1-count resolution
  // agrees within a few parts per thousand.
  it('charge -> rest -> discharge: three segments, one cycle, exit 0', async () => {
    const { outcome, rig, folder, out } = await programRun(cell());
    const r = outcome.result;
    expect(out).toMatch(/program {7}test cycle: 3 segments/);
    expect(out).toMatch(/cycle 1 {7}\d+\.\d mAh/);
    expect(r.end_reason).toBe('program_complete');
    expect(outcome.exitCode).toBe(0);
    const segs = await readSegments(folder);
    expect(segs.map((s) => [s.kind, s.end_reason])).toEqual([
      ['charge', 'termination_current'],
      ['rest', 'rest_time'],
      ['discharge', 'cutoff'],
    ]);
    expect(r.segments).toHaveLength(3);
    expect(r.cycles).toHaveLength(1);
    expect(r.program).toBe('test cycle');
    // The cell (0.02 Ah, linear OCV 3.0..4.2 V, 0.1 ohm) discharged at 1 A reaches 3.0 V
    // under load at 8.3 % state of charge: about 0.0183 Ah from full.
    expect(r.capacity_Ah).toBeCloseTo(r.cycles![0]!.capacity_Ah, 9);
    expect(r.capacity_Ah).toBeGreaterThan(0.017);
    expect(r.capacity_Ah).toBeLessThan(0.0195);
    const mean = r.segments![2]!.mean_current_A!;
    expect(Math.abs(mean - 1.0)).toBeLessThan(0.01);
    // Every command of 1.1 went out through the capabilities: ISET before MODE D.
    const cmds = rig.received.filter((l) => !l.startsWith('C,BEAT'));
    const iset = cmds.findIndex((l) => l.startsWith('C,ISET,0,'));
    const modeD = cmds.findIndex((l) => l.startsWith('C,MODE,0,D'));
    expect(iset).toBeGreaterThan(-1);
    expect(modeD).toBeGreaterThan(iset);
    expect(rig.mode).toBe('rest');
    // The host's figure against the rig's own integral of the discharge.
    const charged = r.segments![0]!.charge_Ah;
    expect(charged).toBeGreaterThan(0.015);
    const manifest = JSON.parse(readFileSync(join(folder, 'manifest.json'), 'utf8')) as {
      program: { name: string; text: string };
    };
    expect(manifest.program.name).toBe('test cycle');
  }, 120_000);

  // docs/protocol.md: flag bit 1 says the rig cut its outputs itself; a rig keeps it from an
  // earlier host's cut until a host switches something on again.
  it('a cut flag left from an earlier, crashed host does not end the next run', async () => {
    const { outcome } = await programRun(cell(), { cutByEarlierHost: true });
    expect(outcome.result.end_reason, outcome.result.end_detail).toBe('program_complete');
    expect(outcome.exitCode).toBe(0);
  }, 120_000);

  it('a v1 rig is refused before anything is switched on, exit 2', async () => {
    const { outcome, rig, err } = await programRun(cell(), { v1: true });
    expect(err).toMatch(/^cellvigil: CV_RIG_INCAPABLE: rig script: speaks protocol v1 only/m);
    expect(outcome.result.end_reason).toBe('refused');
    expect(outcome.result.end_detail).toContain('CV_RIG_INCAPABLE');
    expect(outcome.exitCode).toBe(2);
    expect(rig.received.filter((l) => /^C,(MODE|ISET|PSET|LOAD)/.test(l))).toEqual([]);
  }, 60_000);

  // Li-ion charge window 0..45 °C (common practice, the chemistry file's charge block).
  it('over-temperature during the charge: the charger off, end over_temperature, exit 3', async () => {
    const hot = cell({ celsius: (t, mode) => (mode === 'charge' ? 25 + t / 2000 : 25) });
    const { outcome, rig, folder } = await programRun(hot);
    expect(outcome.result.end_reason).toBe('over_temperature');
    expect(outcome.exitCode).toBe(3);
    expect(rig.mode).toBe('rest');
    const segs = await readSegments(folder);
    expect(segs).toHaveLength(1);
    expect(segs[0]!.end_reason).toBe('over_temperature');
    expect(outcome.result.cycles).toEqual([]);
  }, 60_000);

  // A charge step's timeout (the chemistry's timeout_h caps it; here the program's 0.02 h, 72 s)
  // ends a charge whose charger never terminates; the charger is switched off.
  it('a charge that never terminates ends on its timeout, exit 3', async () => {
    const program = PROGRAM.replace('timeout_h: 1', 'timeout_h: 0.02');
    const big = cell({ capacityAh: 1 });
    const { outcome, rig, folder } = await programRun(big, { program, neverEnds: true });
    expect(outcome.result.end_reason).toBe('charge_timeout');
    expect(outcome.exitCode).toBe(3);
    expect(rig.mode).toBe('rest');
    const segs = await readSegments(folder);
    expect(segs.map((s) => s.end_reason)).toEqual(['charge_timeout']);
    expect(segs[0]!.ended_ms - segs[0]!.started_ms).toBeGreaterThanOrEqual(72_000);
    expect(segs[0]!.ended_ms - segs[0]!.started_ms).toBeLessThan(73_000);
  }, 60_000);

  it('a stop mid-discharge ends the segment as stopped, exit 0, the channel at rest', async () => {
    const { outcome, rig, folder } = await programRun(cell(), { stopAtMs: 320_000 });
    expect(outcome.result.end_reason).toBe('stopped');
    expect(outcome.exitCode).toBe(0);
    expect(rig.mode).toBe('rest');
    const segs = await readSegments(folder);
    expect(segs.map((s) => s.end_reason)).toEqual(['termination_current', 'rest_time', 'stopped']);
    expect(outcome.result.cycles).toEqual([]);
  }, 60_000);

  it('a program run is not resumed: refused with what to do instead', async () => {
    const { folder } = await programRun(cell(), { stopAtMs: 10_000 });
    const manifest = parseManifest(readFileSync(join(folder, 'manifest.json'), 'utf8'), folder);
    const req = {
      speed: 1,
      runs: folder,
      listen: null,
      once: true,
      rotateBytes: 1 << 24,
      channel: 0,
      linkTimeoutS: 60,
      resume: folder,
    };
    await expect(resolveRunConfig(req, manifest)).rejects.toThrow(/cannot be resumed.*--new/);
  }, 60_000);

  // Power = voltage × current (physics): a 3 W step on a current-regulated load is held by
  // re-setting the current from the measured voltage every 5 s, so the mean power of the
  // segment (its energy over its load-on time) stays within a percent or two of 3 W.
  it('a constant-power discharge re-sets the current as the voltage falls', async () => {
    const program = PROGRAM.replace('current_A: 1.0', 'power_W: 3.0');
    const { outcome, rig } = await programRun(cell(), { program });
    expect(outcome.result.end_reason).toBe('program_complete');
    const dis = outcome.result.segments![2]!;
    const onH = dis.charge_Ah / dis.mean_current_A!;
    expect(Math.abs(dis.energy_Wh / onH / 3.0 - 1)).toBeLessThan(0.02);
    expect(rig.received.filter((l) => l.startsWith('C,ISET')).length).toBeGreaterThan(3);
  }, 60_000);

  // docs/protocol.md, "How a host uses 1.1": a setpoint not held for a few seconds ends the step.
  it('a discharge whose setpoint the load cannot hold ends, and is no cycle', async () => {
    const { outcome, folder } = await programRun(cell(), { trimBoundBelowV: 3.4 });
    expect(outcome.result.end_reason).toBe('program_complete');
    const segs = await readSegments(folder);
    expect(segs.map((s) => s.end_reason)).toEqual([
      'termination_current',
      'rest_time',
      'setpoint_not_held',
    ]);
    expect(outcome.result.cycles).toEqual([]);
    expect(outcome.result.capacity_Ah).toBe(0);
  }, 60_000);
});
