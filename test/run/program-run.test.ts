import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { VirtualClock } from '../../src/core/clock.js';
import { readSegments } from '../../src/record/segments.js';
import { startRun, type RunOutcome } from '../../src/run/daemon.js';
import { ScriptedRig11, type ScriptedCell } from './rig11-script.js';

const PROGRAM = `name: test cycle
rated_Ah: 1
steps:
  - charge: { until: cc-cv, current_C: 0.5, timeout_h: 1 }
  - rest: { minutes: 1 }
  - discharge: { current_A: 1.0 }
`;

function cell(over: Partial<ScriptedCell> = {}): ScriptedCell {
  return {
    capacityAh: 0.02,
    soc: 0.1,
    emptyV: 3.0,
    fullV: 4.2,
    ohm: 0.1,
    celsius: () => 25,
    ...over,
  };
}

async function programRun(
  c: ScriptedCell,
  x: { v1?: boolean; program?: string } = {},
): Promise<{ outcome: RunOutcome; rig: ScriptedRig11; folder: string; err: string }> {
  const dir = mkdtempSync(join(tmpdir(), 'cv-program-'));
  const programPath = join(dir, 'program.yaml');
  writeFileSync(programPath, x.program ?? PROGRAM);
  const rigPath = join(process.cwd(), 'config/rigs/cv328-cc.yaml');
  const profile = await loadRigProfile(rigPath);
  const clock = new VirtualClock(0, Date.UTC(2026, 11, 3, 9, 0, 0));
  const rig = new ScriptedRig11({
    clock,
    profile,
    cell: c,
    chargerA: 0.3,
    chargerV: 4.2,
    ...(x.v1 ? { v1: true } : {}),
  });
  const io = { out: new PassThrough(), err: new PassThrough() };
  io.out.resume();
  let err = '';
  io.err.on('data', (d: Buffer) => (err += d.toString()));
  const run = await startRun(
    {
      port: '/dev/null-scripted',
      speed: 1,
      runs: dir,
      listen: null,
      once: true,
      rotateBytes: 1 << 24,
      channel: 0,
      linkTimeoutS: 60,
      fresh: true,
      rig: rigPath,
      chemistry: 'li-ion',
      cells: 1,
      program: programPath,
    },
    io,
    { source: rig, clock },
  );
  let ended = false;
  void run.done.then(() => (ended = true));
  for (let t = 0; !ended && t < 3 * 3_600_000; t += 100) {
    clock.advance(100);
    if (t % 1000 === 0) await new Promise((r) => setImmediate(r));
  }
  return { outcome: await run.done, rig, folder: run.folder, err };
}

describe('a program run against a scripted protocol 1.1 rig', () => {
  // Charge is the time integral of current (physics): the rig's own integral of its true
  // current is the reference; the host's trapezoid over 500 ms frames of 1-count resolution
  // agrees within a few parts per thousand.
  it('charge -> rest -> discharge: three segments, one cycle, exit 0', async () => {
    const { outcome, rig, folder } = await programRun(cell());
    const r = outcome.result;
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

  it('a v1 rig is refused before anything is switched on, exit 2', async () => {
    const { outcome, rig } = await programRun(cell(), { v1: true });
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
});
