import { mkdtempSync } from 'node:fs';
import { readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { progressBar } from '../../src/cli/progress.js';
import { reportRuns } from '../../src/report/report-runs.js';
import { startRun } from '../../src/run/daemon.js';
import type { RunResult } from '../../src/record/result.js';

describe('report on a folder written by `cellvigil run`', () => {
  it("recomputes the daemon's own figures from the raw counts", async () => {
    const runs = mkdtempSync(join(tmpdir(), 'cv-daemon-report-'));
    const sink = new PassThrough().resume();
    const run = await startRun(
      {
        sim: 'quick',
        speed: 40,
        runs,
        listen: null,
        once: true,
        rotateBytes: 8192,
        linkTimeoutS: 60,
        channel: 0,
      },
      { out: sink, err: sink },
    );
    const outcome = await run.done;
    expect(outcome.exitCode).toBe(0);
    const live = JSON.parse(await readFile(join(run.folder, 'result.json'), 'utf8')) as RunResult;
    const out = await reportRuns({ folders: [run.folder], generatedAt: '2026-12-03T10:00:00Z' });
    const r = out.runs[0]!.figures.result;
    expect(out.runs[0]!.resultPath).toBe(join(run.folder, 'result-none.json'));
    expect(out.runs[0]!.reportPath).toBe(join(run.folder, 'report.html'));
    expect(r.capacity_Ah).toBeCloseTo(live.capacity_Ah, 5);
    expect(r.energy_Wh).toBeCloseTo(live.energy_Wh, 5);
    expect(r.duration_s).toBeCloseTo(live.duration_s, 1);
    expect(r.end_reason).toBe(live.end_reason);
    expect(r.frames_accepted).toBe(live.frames_accepted);
    expect(r.frames_rejected).toBe(live.frames_rejected);
    expect(r.frames_lost).toBe(live.frames_lost);
    expect(r.cutoff_V).toBe(live.cutoff_V);
    await rm(runs, { recursive: true, force: true });
  }, 60_000);
});

describe('report on a scheduled run written by `cellvigil run`', () => {
  it('a pulsed discharge: the same figures, one resistance reading per pulse, and the service output', async () => {
    const runs = mkdtempSync(join(tmpdir(), 'cv-daemon-pulsed-'));
    const sink = new PassThrough().resume();
    const run = await startRun(
      {
        sim: 'quick',
        speed: 40,
        runs,
        listen: null,
        once: true,
        rotateBytes: 1 << 24,
        linkTimeoutS: 60,
        channel: 0,
        schedule: 'on 4 s every 6 s',
      },
      { out: sink, err: sink },
    );
    const outcome = await run.done;
    expect(outcome.exitCode).toBe(0);
    const live = JSON.parse(await readFile(join(run.folder, 'result.json'), 'utf8')) as RunResult;
    const f = (await reportRuns({ folders: [run.folder], generatedAt: '2026-12-03T10:00:00Z' }))
      .runs[0]!.figures;
    expect(f.result.capacity_Ah).toBeCloseTo(live.capacity_Ah, 5);
    expect(f.result.duration_s).toBeCloseTo(live.duration_s, 1);
    expect(f.result.schedule).toBe(live.schedule);
    expect(f.result.service_output_h).toBeCloseTo(live.service_output_h!, 4);
    // On 4 s of every 6 s: the load went on once per period until the cutoff.
    const periods = Math.ceil((f.result.duration_s * 1.5) / 6);
    expect(f.loadSwitchOns).toBeGreaterThanOrEqual(periods - 2);
    expect(f.resistance.switch_on!.count).toBe(f.loadSwitchOns);
    expect(f.resistance.switch_off!.count).toBeGreaterThanOrEqual(f.loadSwitchOns - 1);
    await rm(runs, { recursive: true, force: true });
  }, 60_000);
});

describe('progress bar', () => {
  const stream = (
    isTTY: boolean,
  ): { isTTY: boolean; columns: number; text: string; write(s: string): boolean } => ({
    isTTY,
    columns: 80,
    text: '',
    write(s: string) {
      this.text += s;
      return true;
    },
  });

  it('draws on a terminal and clears its line at the end', () => {
    const s = stream(true);
    let t = 0;
    const bar = progressBar(s, () => (t += 1000));
    bar.update('reading samples', 50, 100);
    expect(s.text).toContain(' 50 %');
    bar.update('reading samples', 100, 100);
    expect(s.text).toContain('100 %');
    bar.end();
    expect(s.text.endsWith('\r\x1b[2K')).toBe(true);
  });

  it('stays quiet when the output is not a terminal', () => {
    const s = stream(false);
    const bar = progressBar(s);
    bar.update('reading samples', 50, 100);
    bar.end();
    expect(s.text).toBe('');
  });
});
