import { existsSync, mkdtempSync, readFileSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gunzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { startRun } from '../../src/run/daemon.js';
import type { RunRequest } from '../../src/run/run-request.js';
import { SAMPLE_HEADER } from '../../src/sinks/sample-row.js';
import type { SimSource } from '../../src/sources/sim-source.js';
import { quietIo } from './quiet-io.js';

function request(over: Partial<RunRequest>): RunRequest {
  return {
    sim: 'quick',
    speed: 40,
    runs: mkdtempSync(join(tmpdir(), 'cellvigil-runs-')),
    listen: null,
    once: true,
    rotateBytes: 16 * 1024 * 1024,
    linkTimeoutS: 60,
    channel: 0,
    ...over,
  };
}

// docs/run-folder.md: the layout and the result keys are a contract.
const RESULT_KEYS = [
  'capacity_Ah',
  'energy_Wh',
  'duration_s',
  'end_reason',
  'mean_voltage_V',
  'end_voltage_V',
  'cutoff_V',
  'frames_accepted',
  'frames_rejected',
  'frames_lost',
  'rig_clock_error_ppm',
  'calibration_id',
  'uncertainty',
];

describe('a run on the simulated rig writes the run folder of the contract', () => {
  it('manifest, rotating samples, events, checkpoint and result', async () => {
    const io = quietIo();
    const run = await startRun(request({ rotateBytes: 8192, label: 'layout check' }), io);
    const outcome = await run.done;
    expect(outcome.exitCode, io.text()).toBe(0);
    expect(run.folder).toMatch(/[/\\]\d{8}-\d{6}-layout-check$/);
    // The summary: load-on time as h:mm:ss, and the DC internal resistance at switch-on.
    expect(io.text()).toMatch(/ {2}load on {7}0:00:\d\d; mean/);
    expect(io.text()).toMatch(/ {2}DC resistance \d+(\.\d)? mΩ at switch-on/);
    const files = readdirSync(run.folder).sort();
    expect(files).toEqual(
      expect.arrayContaining(['checkpoint.json', 'events.jsonl', 'manifest.json', 'result.json']),
    );
    // Closed sample files are compressed; the last one stays plain.
    expect(files).toContain('samples-0001.csv.gz');
    expect(files.filter((f) => /^samples-\d{4}\.csv$/.test(f))).toHaveLength(1);
    expect(files.some((f) => f.endsWith('.tmp'))).toBe(false);

    const result = JSON.parse(readFileSync(join(run.folder, 'result.json'), 'utf8')) as Record<
      string,
      unknown
    >;
    for (const k of RESULT_KEYS) expect(result).toHaveProperty(k);
    expect(result['end_reason']).toBe('cutoff');
    expect(result['calibration_id']).toBe('none');

    // Every rotated file starts with the header; together they hold every accepted frame once, in order.
    const sampleFiles = files.filter((f) => /^samples-\d{4}\.csv(\.gz)?$/.test(f));
    expect(sampleFiles.length).toBeGreaterThan(2);
    let rows: string[] = [];
    for (const f of sampleFiles) {
      const bytes = readFileSync(join(run.folder, f));
      const lines = (f.endsWith('.gz') ? gunzipSync(bytes) : bytes).toString('utf8').split('\n');
      expect(lines[0]).toBe(SAMPLE_HEADER);
      expect(lines.at(-1)).toBe('');
      rows = rows.concat(lines.slice(1, -1));
    }
    expect(rows.length).toBe(result['frames_accepted']);
    const times = rows.map((r) => Number(r.split(',')[0]));
    for (let i = 1; i < times.length; i++) expect(times[i]!).toBeGreaterThanOrEqual(times[i - 1]!);
    for (const r of rows) expect(r.split(',')).toHaveLength(SAMPLE_HEADER.split(',').length);
    // The last row's totals are the result's.
    const last = rows.at(-1)!.split(',');
    // result.json rounds to 1 µAh: the two agree within half of it.
    expect(Math.abs(Number(last[12]) - (result['capacity_Ah'] as number))).toBeLessThanOrEqual(
      5e-7 + 1e-12,
    );

    const events = readFileSync(join(run.folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { event: string });
    const names = events.map((e) => e.event);
    expect(names[0]).toBe('run_started');
    expect(names).toContain('precheck_passed');
    expect(names).toContain('load_on');
    expect(names.at(-1)).toBe('run_ended');

    const manifest = JSON.parse(readFileSync(join(run.folder, 'manifest.json'), 'utf8')) as Record<
      string,
      unknown
    >;
    expect(manifest).toMatchObject({
      format: 'cellvigil-run',
      format_version: 1,
      cells: 1,
      cutoff_V: 3,
    });
    const checkpoint = JSON.parse(
      readFileSync(join(run.folder, 'checkpoint.json'), 'utf8'),
    ) as Record<string, unknown>;
    expect(checkpoint['charge_Ah']).toBeCloseTo(result['capacity_Ah'] as number, 6);
  });
});

describe('the precheck and the floors', () => {
  it('refuses a Li-ion cell on a NiMH profile: exit 2, the load never switched on', async () => {
    const io = quietIo();
    const run = await startRun(request({ chemistry: 'nimh' }), io);
    const outcome = await run.done;
    expect(outcome.exitCode).toBe(2);
    expect(outcome.result.end_reason).toBe('refused');
    expect(io.text()).toMatch(/CV_PRECHECK_REFUSED/);
    expect((run.source as SimSource).rig.loadLog().filter((s) => s.on)).toEqual([]);
    // The reason once (as the error), no empty figures, no folder that looks like a run.
    expect(io.text().split('Wrong chemistry or cell count').length - 1).toBe(1);
    expect(io.text()).not.toMatch(/0\.0 mAh/);
    expect(io.text()).toMatch(/no run folder was kept/);
    expect(existsSync(run.folder)).toBe(false);
  });

  it("a --channel beyond the hello's channel count is refused with the fix: exit 2, nothing switched", async () => {
    // Protocol v1: the hello states the rig's channel count; channels count from 0.
    const io = quietIo();
    const run = await startRun(request({ channel: 3 }), io);
    const outcome = await run.done;
    expect(outcome.exitCode).toBe(2);
    expect(io.text()).toMatch(
      /CV_USAGE: rig \S+ reports 1 channel in its hello; channel 3 does not exist/,
    );
    expect(io.text()).toMatch(/Give --channel with only channel 0/);
    expect((run.source as SimSource).rig.loadLog().filter((s) => s.on)).toEqual([]);
    expect(existsSync(run.folder)).toBe(false);
  });

  it('a port that fails to open prints no run folder and leaves none', async () => {
    const io = quietIo();
    const runs = mkdtempSync(join(tmpdir(), 'cellvigil-runs-'));
    const req = request({ runs, chemistry: 'li-ion', port: '/nonexistent/cv-tty' });
    delete req.sim;
    await expect(startRun({ ...req, speed: 1 }, io)).rejects.toBeTruthy();
    expect(io.text()).not.toMatch(/Run folder/);
    expect(readdirSync(runs)).toEqual([]);
  });

  it('refuses a cutoff below the chemistry floor before anything starts (Li-ion floor 2.5 V, common practice)', async () => {
    const io = quietIo();
    await expect(startRun(request({ cutoff: 2.2 }), io)).rejects.toMatchObject({
      code: 'CV_CUTOFF_BELOW_FLOOR',
      exitCode: 2,
    });
  });

  it('a live cutoff change below the floor is refused; one above it applies', async () => {
    const io = quietIo();
    const run = await startRun(request({ speed: 5 }), io);
    expect(run.setCutoffPerCell(2.0, 'test')).toMatchObject({ ok: false });
    expect(run.setCutoffPerCell(3.2, 'test')).toEqual({ ok: true });
    // Every change printed with who made it, and the refusal too.
    expect(io.text()).toMatch(/Cutoff change to 2\.000 V by test refused/);
    expect(io.text()).toMatch(/Cutoff changed by test: 3\.000 V -> 3\.200 V \(3\.200 V per cell\)/);
    run.stop('test');
    const outcome = await run.done;
    expect(outcome.result.cutoff_V).toBeCloseTo(3.2, 6);
    expect(['stopped', 'cutoff']).toContain(outcome.result.end_reason);
    expect(outcome.exitCode).toBe(0);
  });

  it('a stop switches the load off on the rig side and ends as stopped', async () => {
    const io = quietIo();
    const run = await startRun(request({ speed: 10 }), io);
    const rig = (run.source as SimSource).rig;
    while (!rig.truth().loadOn) await new Promise((r) => setTimeout(r, 20));
    run.stop('test');
    const outcome = await run.done;
    expect(outcome.result.end_reason).toBe('stopped');
    expect(outcome.exitCode).toBe(0);
    expect(outcome.result.load_off_confirmed).toBe(true);
    expect(rig.loadLog().map((s) => [s.on, s.cause])).toEqual([
      [true, 'host'],
      [false, 'host'],
    ]);
  });
});
