/**
 * A run folder written by the real pipeline (the simulated rig through the daemon's core and
 * sinks), with the cell id added to its manifest as a later `run --cell` will write it: the
 * registry files it under that id with the result's figures.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { fileRunResult } from '../../src/registry/file-run.js';
import { Registry } from '../../src/registry/registry-db.js';
import { demoScenario, simulateRun, type SimRun } from '../report/sim-run.js';

let root: string;
let run: SimRun;

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-registry-real-'));
  run = await simulateRun({ dir: join(root, 'runs', 'real'), scenario: demoScenario() });
}, 60_000);
afterAll(() => rm(root, { recursive: true, force: true }));

describe('a run folder from the real pipeline', () => {
  it('is not filed without a cell id, and is filed under the manifest’s cell id', async () => {
    const db = join(root, 'registry.sqlite');
    const none = await fileRunResult(db, run.folder);
    expect(none).toMatchObject({ status: 'skipped' });
    expect(none.status === 'skipped' && none.reason).toMatch(/no cell id/);

    const manifestPath = join(run.folder, 'manifest.json');
    const manifest = JSON.parse(readFileSync(manifestPath, 'utf8')) as Record<string, unknown>;
    writeFileSync(manifestPath, JSON.stringify({ ...manifest, cell_id: 'SIM-01' }, null, 2));
    expect(await fileRunResult(db, run.folder)).toMatchObject({
      status: 'filed',
      cell_id: 'SIM-01',
    });

    const reg = Registry.open(db);
    const [filed] = reg.runsOf('SIM-01');
    reg.close();
    expect(filed!.capacity_Ah).toBe(run.result.capacity_Ah);
    expect(filed!.capacity_u_Ah).toBe(run.result.uncertainty.capacity_Ah.standard);
    expect(filed!.end_reason).toBe(run.result.end_reason);
    expect(filed!.started_wall).toBe(run.result.started_wall);
    expect(filed!.calibration_id).toBe('none');
    // Charge over time is the mean current (physics: Q = I·t).
    expect(filed!.mean_current_A).toBeCloseTo(
      run.result.capacity_Ah / (run.result.duration_s / 3600),
      9,
    );
  });
});
