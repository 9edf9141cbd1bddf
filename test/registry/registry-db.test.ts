import { mkdtempSync, rmSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { describeFiling, fileRecord, fileRunResult } from '../../src/registry/file-run.js';
import { trustSummary, type TrustRules } from '../../src/registry/grading.js';
import { recordFromResult, type RunRecord } from '../../src/registry/run-record.js';
import { rebuildRegistry } from '../../src/registry/rebuild.js';
import { Registry } from '../../src/registry/registry-db.js';
import { defaultRegistryPath } from '../../src/registry/registry-path.js';
import { fixtureResult, writeFixtureRun, type FixtureRun } from './run-fixtures.js';

let dir: string;
let runs: string;
let dbPath: string;

const cell = (id: string, rated = 2.5, chemistry = 'li-ion') => ({
  cell_id: id,
  chemistry,
  rated_Ah: rated,
  source: 'laptop pack',
  notes: '',
  registered_at: '2026-01-01T00:00:00.000Z',
});

beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'cv-registry-'));
  runs = join(dir, 'runs');
  mkdirSync(runs);
  dbPath = join(dir, 'registry.sqlite');
});
afterEach(() => rmSync(dir, { recursive: true, force: true }));

describe('registry database', () => {
  it('lives beside the runs folder by default', () => {
    expect(defaultRegistryPath('/data/lab/runs')).toBe('/data/lab/cellvigil-registry.sqlite');
  });

  it('is versioned by migrations and refuses a newer schema', () => {
    Registry.open(dbPath).close();
    const raw = new Database(dbPath);
    expect(raw.pragma('user_version', { simple: true })).toBe(3);
    raw.pragma('user_version = 99');
    raw.close();
    expect(() => Registry.open(dbPath)).toThrow(/CV_REGISTRY_OPEN|schema version 99/);
  });

  it('files a run once however often it is filed (same cell and start)', async () => {
    const folder = writeFixtureRun(runs, {
      cell_id: 'C-001',
      started: '2026-03-01T10:00:00.000Z',
      capacity_Ah: 2.4,
    });
    expect((await fileRunResult(dbPath, folder)).status).toBe('filed');
    const again = await fileRunResult(dbPath, folder);
    expect(describeFiling(again, dbPath)).toBe(`filed in the registry ${dbPath} under cell C-001`);
    const unfinished = join(runs, 'still-going');
    mkdirSync(unfinished);
    expect(describeFiling(await fileRunResult(dbPath, unfinished), dbPath)).toBe(
      `not filed in the registry: ${unfinished} has no result.json yet`,
    );
    const reg = Registry.open(dbPath);
    expect(reg.runsOf('C-001')).toHaveLength(1);
    expect(reg.counts().runs).toBe(1);
    reg.close();
  });

  it('refuses a duplicate id and registers nothing of that batch', () => {
    const reg = Registry.open(dbPath);
    reg.addCells([cell('A1')], 'test');
    expect(() => reg.addCells([cell('A2'), cell('A1')], 'cells.csv')).toThrow(/already registered/);
    expect(() => reg.addCells([cell('B1'), cell('B1')], 'cells.csv')).toThrow(/given twice/);
    expect(reg.counts().cells).toBe(1);
    reg.close();
  });

  it('lists with filters and sorting on the latest run that reached the cutoff', async () => {
    const reg = Registry.open(dbPath);
    reg.addCells([cell('A'), cell('B'), cell('C'), cell('N', 2.0, 'nimh')], 'test');
    reg.close();
    const add = (id: string, started: string, cap: number, r: number, end = 'cutoff') =>
      fileRunResult(
        dbPath,
        writeFixtureRun(runs, {
          cell_id: id,
          started,
          capacity_Ah: cap,
          dc_resistance_ohm: r,
          end_reason: end,
        }),
      );
    await add('A', '2025-01-01T00:00:00Z', 2.5, 0.04);
    await add('A', '2026-01-01T00:00:00Z', 2.3, 0.05);
    await add('A', '2026-02-01T00:00:00Z', 0.4, 0.05, 'stopped'); // not a capacity
    await add('B', '2026-01-05T00:00:00Z', 1.9, 0.09);
    await add('N', '2026-01-05T00:00:00Z', 1.8, 0.03);
    const list = Registry.open(dbPath);
    const a = list.listCells({ chemistry: 'li-ion' }, 'capacity', true);
    expect(a.map((r) => r.cell_id)).toEqual(['A', 'B', 'C']);
    expect(a[0]!.capacity_Ah).toBe(2.3);
    expect(a[0]!.runs).toBe(3);
    expect(a[0]!.soh).toBeCloseTo(2.3 / 2.5, 12);
    expect(list.listCells({ minSoh: 0.8 }).map((r) => r.cell_id)).toEqual(['A', 'N']);
    expect(
      list.listCells({ maxResistanceOhm: 0.05, minCapacityAh: 2 }).map((r) => r.cell_id),
    ).toEqual(['A']);
    expect(list.listCells({ untested: true }).map((r) => r.cell_id)).toEqual(['C']);
    expect(
      list.listCells({ testedBeforeMs: Date.parse('2026-01-03T00:00:00Z') }).map((r) => r.cell_id),
    ).toEqual([]);
    expect(list.listCells({}, 'tested', true).map((r) => r.cell_id)).toEqual(['A', 'B', 'N', 'C']);
    list.close();
  });

  it('rebuilds from run folders, reporting damaged, unfinished and id-less runs', async () => {
    writeFixtureRun(runs, { cell_id: 'A', started: '2025-01-01T00:00:00Z', capacity_Ah: 2.5 });
    writeFixtureRun(runs, { cell_id: 'A', started: '2026-01-01T00:00:00Z', capacity_Ah: 2.4 });
    writeFixtureRun(runs, { started: '2026-01-02T00:00:00Z', capacity_Ah: 2.4 }, 'no-id');
    mkdirSync(join(runs, 'unfinished'));
    mkdirSync(join(runs, 'damaged'));
    writeFileSync(join(runs, 'damaged', 'result.json'), '{"capacity_Ah": 2.');
    mkdirSync(join(runs, 'wrong-type'));
    writeFileSync(join(runs, 'wrong-type', 'result.json'), '{"capacity_Ah": "lots"}');
    const report = await rebuildRegistry(dbPath, [runs]);
    expect(report.folders).toBe(6);
    expect(report.filed).toBe(2);
    expect(report.unfinished).toEqual([join(runs, 'unfinished')]);
    expect(report.skipped.map((s) => s.folder)).toEqual([join(runs, 'no-id')]);
    expect(report.damaged.map((d) => d.folder)).toEqual([
      join(runs, 'damaged'),
      join(runs, 'wrong-type'),
    ]);
    expect(report.damaged[0]!.message).toMatch(/not valid JSON/);
    expect(report.unregistered).toEqual(['A']);
    const reg = Registry.open(dbPath);
    expect(reg.runsOf('A').map((r) => r.capacity_Ah)).toEqual([2.5, 2.4]);
    reg.close();
  });

  it("sums up a cell's runs inside SQLite exactly as the grading code does", async () => {
    const mk = (r: FixtureRun, u?: number | null): RunRecord => {
      const rec = recordFromResult(fixtureResult(r) as never, 'f', null);
      if (typeof rec === 'string') throw new Error(rec);
      return u === undefined ? rec : { ...rec, capacity_u_Ah: u };
    };
    const at = (d: number): string => new Date(Date.UTC(2026, 0, 1 + d)).toISOString();
    const runs: RunRecord[] = [
      mk({ cell_id: 'S1', started: at(0), capacity_Ah: 2.4 }),
      mk({ cell_id: 'S1', started: at(1), capacity_Ah: 2.3, calibration_id: 'none' }),
      mk({ cell_id: 'S1', started: at(2), capacity_Ah: 2.2, end_reason: 'stopped' }),
      mk({ cell_id: 'S2', started: at(0), capacity_Ah: 2.0 }, null),
      mk({ cell_id: 'S2', started: at(1), capacity_Ah: 0 }),
      // 2u/C exactly at the limit counts; just above does not.
      mk({ cell_id: 'S3', started: at(0), capacity_Ah: 2, u_Ah: 0.05 }),
      mk({ cell_id: 'S3', started: at(1), capacity_Ah: 2, u_Ah: 0.0501 }),
      mk({ cell_id: 'S3', started: at(2), capacity_Ah: 1.9, u_Ah: 0.001 }),
    ];
    for (const r of runs) expect((await fileRecord(dbPath, r)).status).toBe('filed');
    const reg = Registry.open(dbPath);
    for (const trust of [
      { min_runs: 1, max_relative_uncertainty: 0.05, require_calibration: true },
      { min_runs: 2, max_relative_uncertainty: 0.2, require_calibration: false },
    ] satisfies TrustRules[]) {
      const sql = reg.trustSummaries(['S1', 'S2', 'S3', 'none'], trust);
      for (const id of ['S1', 'S2', 'S3']) {
        const ts = trustSummary(
          runs.filter((r) => r.cell_id === id),
          trust,
        );
        const got = sql.get(id)!;
        expect({ ...got, latest: got.latest?.started_ms ?? null }).toEqual({
          ...ts,
          latest: ts.latest?.started_ms ?? null,
        });
      }
      expect(sql.has('none')).toBe(false);
    }
    reg.close();
  });
});
