/**
 * The registry takes each cycle of a program run: result.json `cycles` (docs/run-folder.md)
 * filed as rows linked to the run, once however often the run is filed, made again by a
 * rebuild, and shown in a cell's history; a program run with a full cycle counts for grading
 * and fade by its own figure (its latest full cycle's).
 */
import { mkdirSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { historyText } from '../../src/registry/cell-text.js';
import { fileRunResult } from '../../src/registry/file-run.js';
import { runDoubts, trustSummary } from '../../src/registry/grading.js';
import { cellHistory } from '../../src/registry/history.js';
import { historyPage } from '../../src/registry/history-page.js';
import { MIGRATIONS } from '../../src/registry/migrations.js';
import { rebuildRegistry } from '../../src/registry/rebuild.js';
import { Registry } from '../../src/registry/registry-db.js';
import { fixtureResult } from './run-fixtures.js';

const TRUST = { min_runs: 1, max_relative_uncertainty: 0.05, require_calibration: true };

/** Figures with their standard uncertainty, in result.json's shape (k = 2 expanded). */
const fig = (standard: number) => ({ standard, expanded: 2 * standard, k: 2 });

/**
 * A program run's result.json: charge, rest, discharge repeated three times. Capacities
 * 2.50, 2.48 and 2.45 Ah; the top-level figures are the last full cycle's.
 */
function programResult(cellId: string, started: string, capacities: number[], end: string) {
  const segments: unknown[] = [];
  const cycles: unknown[] = [];
  let t = Date.parse(started);
  capacities.forEach((cap, k) => {
    for (const kind of ['charge', 'rest', 'discharge'] as const) {
      const index = segments.length;
      segments.push({
        index,
        kind,
        purpose: 'program',
        step: kind,
        cycle: k + 1,
        started_ms: t,
        ended_ms: t + 3600_000,
        end_reason: kind === 'discharge' ? 'cutoff' : kind === 'rest' ? 'time' : 'terminated',
        setpoint: {},
        duration_s: 3600,
        charge_Ah: kind === 'rest' ? 0 : cap,
        energy_Wh: kind === 'rest' ? 0 : cap * 3.7,
        mean_current_A: kind === 'rest' ? null : 0.5,
        end_voltage_V: 3.0,
        uncertainty: { charge_Ah: fig(cap * 0.004), energy_Wh: fig(cap * 0.015) },
      });
      t += 3600_000;
      if (kind === 'discharge')
        cycles.push({
          cycle: k + 1,
          segment: index,
          capacity_Ah: cap,
          energy_Wh: cap * 3.7,
          mean_current_A: 0.5,
          uncertainty: { capacity_Ah: fig(cap * 0.004), energy_Wh: fig(cap * 0.015) },
          of_first: cap / capacities[0]!,
        });
    }
  });
  const last = capacities.at(-1) ?? 0;
  return {
    ...fixtureResult({ cell_id: cellId, started, capacity_Ah: last, u_Ah: last * 0.004 }),
    end_reason: end,
    program: 'three-cycles',
    segments,
    cycles,
    cycle_trend: null,
  };
}

function writeRun(dir: string, result: unknown): string {
  mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'result.json'), `${JSON.stringify(result, null, 2)}\n`);
  return dir;
}

function setup() {
  const root = mkdtempSync(join(tmpdir(), 'cv-reg-cycles-'));
  const runs = join(root, 'runs');
  const db = join(root, 'registry.sqlite');
  return { root, runs, db };
}

describe('the registry takes each cycle of a program run', () => {
  it('files one row per cycle, linked to the run, once however often the run is filed', async () => {
    const { runs, db } = setup();
    const folder = writeRun(
      join(runs, 'p1'),
      programResult('P-1', '2026-05-01T08:00:00.000Z', [2.5, 2.48, 2.45], 'program_complete'),
    );
    expect((await fileRunResult(db, folder)).status).toBe('filed');
    expect((await fileRunResult(db, folder)).status).toBe('filed');
    const raw = new Database(db, { readonly: true });
    expect(raw.prepare('SELECT count(*) FROM cycles').pluck().get()).toBe(3);
    expect(raw.prepare('SELECT count(*) FROM runs').pluck().get()).toBe(1);
    raw.close();
    const reg = Registry.open(db);
    const [run] = reg.runsOf('P-1');
    reg.close();
    expect(run!.full_cycles).toBe(3);
    expect(run!.capacity_Ah).toBe(2.45);
    expect(run!.cycles!.map((c) => [c.cycle, c.segment, c.capacity_Ah])).toEqual([
      [1, 2, 2.5],
      [2, 5, 2.48],
      [3, 8, 2.45],
    ]);
    expect(run!.cycles![1]!.capacity_u_Ah).toBeCloseTo(2.48 * 0.004, 12);
    expect(run!.cycles![2]!.of_first).toBeCloseTo(2.45 / 2.5, 12);
  });

  it('files a cycle that carries only the keys result.json requires', async () => {
    const { runs, db } = setup();
    const base = programResult('M-1', '2026-05-01T08:00:00.000Z', [2.5], 'program_complete');
    const folder = writeRun(join(runs, 'm'), {
      ...base,
      cycles: [{ cycle: 1, segment: 2, capacity_Ah: 2.5 }],
    });
    expect((await fileRunResult(db, folder)).status).toBe('filed');
    const reg = Registry.open(db);
    const h = cellHistory('M-1', null, reg.runsOf('M-1'), TRUST);
    reg.close();
    expect(h.rows[0]!.run.cycles).toEqual([
      {
        cycle: 1,
        segment: 2,
        capacity_Ah: 2.5,
        capacity_u_Ah: null,
        energy_Wh: null,
        energy_u_Wh: null,
        mean_current_A: null,
        of_first: null,
      },
    ]);
    expect(historyText({ history: h, grade: null } as never)).toMatch(/^1 +2\.5000 ± — +— +— +—$/m);
  });

  it('a rebuild from the run folders files the same cycles', async () => {
    const { runs, db } = setup();
    writeRun(
      join(runs, 'p1'),
      programResult('P-2', '2026-05-01T08:00:00.000Z', [2.5, 2.4], 'program_complete'),
    );
    writeRun(
      join(runs, 'd1'),
      fixtureResult({ cell_id: 'P-2', started: '2026-04-01T08:00:00.000Z', capacity_Ah: 2.52 }),
    );
    await rebuildRegistry(db, [runs]);
    await rebuildRegistry(db, [runs]);
    const reg = Registry.open(db);
    const got = reg.runsOf('P-2');
    reg.close();
    // A run that was one discharge carries no cycles; the program run carries its two.
    expect(got.map((r) => r.cycles?.map((c) => c.capacity_Ah) ?? null)).toEqual([null, [2.5, 2.4]]);
  });

  it('a registry made before cycles were filed is brought forward, its runs kept', async () => {
    const { runs, db } = setup();
    const old = new Database(db);
    old.exec(MIGRATIONS[0]!);
    old.pragma('user_version = 1');
    old.close();
    const folder = writeRun(
      join(runs, 'd1'),
      fixtureResult({ cell_id: 'O-1', started: '2026-04-01T08:00:00.000Z', capacity_Ah: 2.5 }),
    );
    expect((await fileRunResult(db, folder)).status).toBe('filed');
    const reg = Registry.open(db);
    expect(reg.runsOf('O-1')[0]!.cycles).toBeUndefined();
    reg.close();
  });
});

describe('a program run in grading, fade and the history', () => {
  const records = () => {
    const { runs, db } = setup();
    const files = [
      writeRun(
        join(runs, 'a'),
        programResult('H-1', '2026-01-10T08:00:00.000Z', [2.5, 2.49], 'program_complete'),
      ),
      writeRun(
        join(runs, 'b'),
        programResult('H-1', '2026-03-10T08:00:00.000Z', [2.46], 'over_temperature'),
      ),
      writeRun(join(runs, 'c'), programResult('H-1', '2026-05-10T08:00:00.000Z', [], 'stopped')),
    ];
    return { db, files };
  };

  // A capacity is measured by a discharge to the end-of-discharge voltage (common practice):
  // a program run counts when it has a full cycle, whatever ended the program afterwards.
  it('counts a program run with a full cycle, and leaves out one without', async () => {
    const { db, files } = records();
    for (const f of files) await fileRunResult(db, f);
    const reg = Registry.open(db);
    const runs = reg.runsOf('H-1');
    // The run with no full cycle has a zero capacity too: also too uncertain to count.
    expect(runs.map((r) => runDoubts(r, TRUST))).toEqual([[], [], ['interrupted', 'uncertain']]);
    const sql = reg.trustSummaries(['H-1'], TRUST).get('H-1')!;
    const ts = trustSummary(runs, TRUST);
    expect(sql.trusted).toBe(2);
    expect({ ...sql, latest: sql.latest?.started_ms }).toEqual({
      ...ts,
      latest: ts.latest?.started_ms,
    });
    // Lists show the latest run that measured the capacity: the over-temperature program run's
    // full cycle, not the later run without one.
    reg.addCells(
      [
        {
          cell_id: 'H-1',
          chemistry: 'li-ion',
          rated_Ah: 2.6,
          source: '',
          notes: '',
          registered_at: '2026-01-01T00:00:00Z',
        },
      ],
      'test',
    );
    expect(reg.listCells({})[0]!.capacity_Ah).toBe(2.46);
    reg.close();
  });

  it('shows each program run’s cycles with their uncertainty, in text and on the page', async () => {
    const { db, files } = records();
    for (const f of files) await fileRunResult(db, f);
    const reg = Registry.open(db);
    const h = cellHistory('H-1', null, reg.runsOf('H-1'), TRUST);
    reg.close();
    const text = historyText({ history: h, grade: null } as never);
    expect(text).toContain('cycles of the run started 2026-01-10 08:00');
    // 2.49 Ah with a standard uncertainty of 0.4 %: ± 0.0199 Ah expanded (k = 2).
    expect(text).toMatch(/^2 +2\.4900 ± 0\.0199 +99\.6 %/m);
    const html = historyPage(h, null, '2026-06-01T00:00:00Z');
    expect(html).toContain('Cycles of program runs');
    expect(html).toContain('data-key="capacity_Ah" data-value="2.49">2.4900 ± 0.0199</td>');
    // The run with no full cycle has an empty table, not a missing one.
    expect(html).toContain('ended stopped: 0 full cycle(s)');
  });
});
