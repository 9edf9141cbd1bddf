import { cpSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { recomputeRun } from '../../src/report/recompute.js';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { cell, programRun } from '../run/program-run-helper.js';

// The recompute measures the logged rows with the same measuring step and the same segment
// accounting as the live run: the figures must agree to the last logged digit (the run
// folder's promise that every result can be recomputed from its rows).
describe('the recompute of a program run', () => {
  it('gives every segment, cycle and the trend exactly as the live run did', async () => {
    const { outcome, folder } = await programRun(cell());
    const live = outcome.result;
    const f = await recomputeRun(await openRunFolder(folder));
    expect(f.result.segments).toEqual(live.segments);
    expect(f.result.cycles).toEqual(live.cycles);
    expect(f.result.cycle_trend).toEqual(live.cycle_trend);
    expect(f.result.capacity_Ah).toBe(live.capacity_Ah);
    expect(f.result.program).toBe('test cycle');
  }, 120_000);

  it('records the segment an interruption cut off as interrupted, and no cycle from it', async () => {
    const { outcome, folder } = await programRun(cell());
    const cutDir = join(mkdtempSync(join(tmpdir(), 'cv-cut-')), 'run');
    cpSync(folder, cutDir, { recursive: true });
    // The daemon died during the discharge: its segment line and the result never written.
    rmSync(join(cutDir, 'result.json'));
    const lines = readFileSync(join(cutDir, 'segments.jsonl'), 'utf8').trim().split('\n');
    writeFileSync(join(cutDir, 'segments.jsonl'), `${lines.slice(0, 2).join('\n')}\n`);
    const f = await recomputeRun(await openRunFolder(cutDir));
    const segs = f.result.segments!;
    expect(segs.map((s) => s.end_reason)).toEqual([
      'termination_current',
      'rest_time',
      'interrupted',
    ]);
    expect(segs[2]!.kind).toBe('discharge');
    expect(f.result.cycles).toEqual([]);
    expect(f.result.capacity_Ah).toBe(0);
    // The rows up to the cut are all there: the cut discharge holds what the live one held,
    // less the frame that ended it (its row already reads stopping): 1 A for one 500 ms step.
    const oneFrameAh = (1.0 * 0.5) / 3600;
    const d = outcome.result.segments![2]!.charge_Ah - segs[2]!.charge_Ah;
    expect(d).toBeGreaterThanOrEqual(0);
    expect(d).toBeLessThanOrEqual(oneFrameAh * 1.01);
  }, 120_000);
});
