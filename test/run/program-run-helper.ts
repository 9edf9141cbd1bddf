/** Program runs against the scripted 1.1 rig, on a virtual clock, for the run and report tests. */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { VirtualClock } from '../../src/core/clock.js';
import { startRun, type RunOutcome } from '../../src/run/daemon.js';
import { ScriptedRig11, type ScriptedCell } from './rig11-script.js';

export const PROGRAM = `name: test cycle
rated_Ah: 1
steps:
  - charge: { until: cc-cv, current_C: 0.5, timeout_h: 1 }
  - rest: { minutes: 1 }
  - discharge: { current_A: 1.0 }
`;

export function cell(over: Partial<ScriptedCell> = {}): ScriptedCell {
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

export async function programRun(
  c: ScriptedCell,
  x: {
    v1?: boolean;
    program?: string;
    neverEnds?: boolean;
    stopAtMs?: number;
    trimBoundBelowV?: number;
    cutByEarlierHost?: boolean;
  } = {},
): Promise<{ outcome: RunOutcome; rig: ScriptedRig11; folder: string; err: string; out: string }> {
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
    ...(x.neverEnds ? { neverEnds: true } : {}),
    ...(x.cutByEarlierHost ? { cutByEarlierHost: true } : {}),
    ...(x.trimBoundBelowV !== undefined ? { trimBoundBelowV: x.trimBoundBelowV } : {}),
  });
  const io = { out: new PassThrough(), err: new PassThrough() };
  let out = '';
  io.out.on('data', (d: Buffer) => (out += d.toString()));
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
    if (t === x.stopAtMs) run.stop('the test');
    if (t % 1000 === 0) await new Promise((r) => setImmediate(r));
  }
  const outcome = await run.done;
  return { outcome, rig, folder: run.folder, err, out };
}
