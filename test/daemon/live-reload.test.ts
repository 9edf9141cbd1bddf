import { copyFileSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { fitQuantity, sealCalibration } from '../../src/calibration/calibration.js';
import { DEFAULT_CHEMISTRIES_PATH } from '../../src/chemistry/chemistry-file.js';
import { startRun, type RunHandle } from '../../src/run/daemon.js';
import type { RunRequest } from '../../src/run/run-request.js';

function calibration(offsetA: number): object {
  // Two reference points on a straight line: gain 1, the given offset.
  const points = [0.5, 1.5].map((a) => ({
    raw_mean: a * 1000,
    nominal: a,
    reference: a + offsetA,
    reference_u: 0.001,
  }));
  return sealCalibration({
    format: 1,
    rig: 'simrig-a1',
    date: '2026-11-30T08:00:00.000Z',
    reference_instrument: 'test meter',
    current: fitQuantity('current', points, 'gain_offset').calibration,
  });
}

async function waitForEvent(
  folder: string,
  name: string,
  ms = 10_000,
): Promise<Record<string, unknown>> {
  const until = Date.now() + ms;
  for (;;) {
    const text = (() => {
      try {
        return readFileSync(join(folder, 'events.jsonl'), 'utf8');
      } catch {
        return '';
      }
    })();
    const hit = text
      .split('\n')
      .filter((l) => l !== '')
      .map((l) => JSON.parse(l) as Record<string, unknown>)
      .find((e) => e['event'] === name);
    if (hit) return hit;
    if (Date.now() > until) throw new Error(`no ${name} event`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

function start(over: Partial<RunRequest>): Promise<RunHandle> {
  const io = { out: new PassThrough(), err: new PassThrough() };
  io.out.resume();
  io.err.resume();
  return startRun(
    {
      sim: 'demo',
      speed: 20,
      runs: mkdtempSync(join(tmpdir(), 'cv-reload-')),
      listen: null,
      once: true,
      rotateBytes: 1 << 24,
      channel: 0,
      linkTimeoutS: 60,
      ...over,
    },
    io,
  );
}

describe('files edited while a run goes on', () => {
  it('a new valid calibration applies from the next sample; a broken one is rejected and the old stays', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cv-cal-'));
    const path = join(dir, 'cal.json');
    const first = calibration(0) as { id: string };
    writeFileSync(path, JSON.stringify(first));
    const run = await start({ calibration: path });
    await waitForEvent(run.folder, 'load_on');
    const second = calibration(-0.03) as { id: string };
    writeFileSync(path, JSON.stringify(second));
    const changed = await waitForEvent(run.folder, 'calibration_changed');
    expect(changed).toMatchObject({ old_id: first.id, new_id: second.id });
    writeFileSync(path, '{"format": 1, "rig": "half-writ');
    const rejected = await waitForEvent(run.folder, 'calibration_rejected');
    expect(rejected).toMatchObject({ kept_id: second.id });
    // Truncated to nothing, as an editor's crash could leave it: rejected as well.
    writeFileSync(path, '');
    await new Promise((r) => setTimeout(r, 1500));
    run.stop('test');
    const outcome = await run.done;
    expect(outcome.result.calibration_id).toBe(second.id);
    const rows = readFileSync(join(run.folder, 'samples-0001.csv'), 'utf8')
      .trim()
      .split('\n')
      .slice(1);
    const ids = rows.map((r) => r.split(',').at(-1));
    // No sample lost or counted twice across the reloads.
    expect(rows.length).toBe(outcome.result.frames_accepted);
    const seqs = rows.map((r) => Number(r.split(',')[3]));
    for (let i = 1; i < seqs.length; i++) expect(seqs[i]!).toBeGreaterThan(seqs[i - 1]!);
    const events = readFileSync(join(run.folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { event: string });
    expect(events.filter((e) => e.event === 'calibration_rejected').length).toBeGreaterThanOrEqual(
      2,
    );
    // Rows carry the id in force when they were made: the first, then the second, never a broken one.
    expect(new Set(ids)).toEqual(new Set([first.id, second.id]));
    expect(ids.indexOf(second.id)).toBeGreaterThan(ids.lastIndexOf(first.id));
  });

  it('an edited chemistry file changes the limits only when it validates', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cv-chem-'));
    const path = join(dir, 'chemistries.yaml');
    copyFileSync(DEFAULT_CHEMISTRIES_PATH, path);
    const run = await start({ chemistriesFile: path });
    await waitForEvent(run.folder, 'load_on');
    const original = readFileSync(path, 'utf8');
    // Li-ion default cutoff 3.0 -> 3.1 V per cell.
    const edited = original.replace(
      /(li-ion:[\s\S]*?cutoff_V_per_cell:\s*\{\s*value:\s*)3\.0?0?/,
      '$13.1',
    );
    expect(edited).not.toBe(original);
    writeFileSync(path, edited);
    const changed = await waitForEvent(run.folder, 'chemistry_changed');
    expect(changed['cutoff_V']).toBeCloseTo(3.1, 9);
    writeFileSync(path, 'li-ion: [unclosed');
    await waitForEvent(run.folder, 'chemistry_rejected');
    run.stop('test');
    const outcome = await run.done;
    expect(outcome.result.cutoff_V).toBeCloseTo(3.1, 9);
  });
});
