/**
 * The registry database (SQLite through better-sqlite3): cells, their runs, and a per-cell
 * summary for lists. The one adapter that speaks SQL; everything else gets typed records.
 * Run folders stay the source of truth: every row of `runs` can be made again from them.
 */
import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import Database from 'better-sqlite3';
import { ErrorCodes, makeError } from '../core/errors.js';
import { RUN_DOUBTS, type TrustRules, type TrustSummary } from './grading.js';
import type { CellInfo } from './history.js';
import { MIGRATIONS } from './migrations.js';
import type { CycleRecord, RunRecord } from './run-record.js';
import { registryError } from './sqlite-errors.js';

export interface RegistryOpenOptions {
  /** How long a write waits for another process's lock, ms. @default 2000 */
  busyTimeoutMs?: number;
  readonly?: boolean;
}

/** A registered cell with the figures of its latest run that reached the cutoff. */
export interface CellListRow extends CellInfo {
  runs: number;
  last_tested_ms: number | null;
  capacity_Ah: number | null;
  capacity_u_Ah: number | null;
  dc_resistance_ohm: number | null;
  /** capacity_Ah / rated_Ah. */
  soh: number | null;
}

export interface CellFilter {
  chemistry?: string;
  minCapacityAh?: number;
  maxCapacityAh?: number;
  minResistanceOhm?: number;
  maxResistanceOhm?: number;
  minSoh?: number;
  maxSoh?: number;
  /** Last tested at or after / before, ms since the epoch. */
  testedAfterMs?: number;
  testedBeforeMs?: number;
  /** Only cells never tested. */
  untested?: boolean;
}

type SummaryRow = [
  string,
  number,
  number,
  number,
  number,
  number,
  number | null,
  string | null,
  string | null,
  number | null,
  number | null,
  number | null,
  number | null,
];

export const SORT_KEYS = ['id', 'capacity', 'resistance', 'soh', 'tested', 'rated'] as const;
export type CellSortKey = (typeof SORT_KEYS)[number];

const SORT_SQL: Record<CellSortKey, string> = {
  id: 'c.cell_id',
  capacity: 's.capacity_Ah',
  resistance: 's.dc_resistance_ohm',
  soh: 'soh',
  tested: 's.last_tested_ms',
  rated: 'c.rated_Ah',
};

const RUN_COLUMNS = [
  'run_key',
  'cell_id',
  'folder',
  'started_ms',
  'started_wall',
  'ended_wall',
  'end_reason',
  'chemistry',
  'cells',
  'capacity_Ah',
  'capacity_u_Ah',
  'energy_Wh',
  'energy_u_Wh',
  'dc_resistance_ohm',
  'mean_voltage_V',
  'end_voltage_V',
  'mean_current_A',
  'temperature_C',
  'duration_s',
  'calibration_id',
  'full_cycles',
] as const;

const CYCLE_COLUMNS = [
  'run_key',
  'segment',
  'cycle',
  'capacity_Ah',
  'capacity_u_Ah',
  'energy_Wh',
  'energy_u_Wh',
  'mean_current_A',
  'of_first',
] as const;

const INSERT_CYCLE = `INSERT INTO cycles (${CYCLE_COLUMNS.join(', ')})
  VALUES (${CYCLE_COLUMNS.map((c) => `@${c}`).join(', ')})`;

/**
 * A run whose own figure measured the capacity: a discharge that ended at its cutoff, or a
 * program run with at least one full cycle (its figures are then its latest full cycle's).
 */
export const MEASURED_SQL = `(end_reason = 'cutoff' OR coalesce(full_cycles, 0) > 0)`;

const UPSERT_RUN = `INSERT INTO runs (${RUN_COLUMNS.join(', ')}, filed_at)
  VALUES (${RUN_COLUMNS.map((c) => `@${c}`).join(', ')}, @filed_at)
  ON CONFLICT (run_key) DO UPDATE SET ${RUN_COLUMNS.filter((c) => c !== 'run_key')
    .map((c) => `${c} = excluded.${c}`)
    .join(', ')}, filed_at = excluded.filed_at`;

// The latest run that reached the cutoff, and the counts, for one cell or for all.
const SUMMARY_SELECT = `
  SELECT a.cell_id, a.runs, a.last_tested_ms, l.capacity_Ah, l.capacity_u_Ah,
         l.dc_resistance_ohm, l.started_ms
  FROM (SELECT cell_id, count(*) AS runs, max(started_ms) AS last_tested_ms
        FROM runs WHERE %WHERE% GROUP BY cell_id) a
  LEFT JOIN (SELECT cell_id, capacity_Ah, capacity_u_Ah, dc_resistance_ohm, started_ms,
                    row_number() OVER (PARTITION BY cell_id ORDER BY started_ms DESC) AS n
             FROM runs WHERE ${MEASURED_SQL} AND %WHERE%) l
    ON l.cell_id = a.cell_id AND l.n = 1`;

export class Registry {
  readonly path: string;
  private readonly db: Database.Database;

  private constructor(path: string, db: Database.Database) {
    this.path = path;
    this.db = db;
  }

  /** Opens (creating it and its folder when needed) and brings the schema up to date. */
  static open(path: string, options: RegistryOpenOptions = {}): Registry {
    let db: Database.Database | undefined;
    try {
      if (!options.readonly) mkdirSync(dirname(path), { recursive: true });
      db = new Database(path, {
        timeout: options.busyTimeoutMs ?? 2000,
        readonly: options.readonly ?? false,
        fileMustExist: options.readonly ?? false,
      });
      const registry = new Registry(path, db);
      // A larger page cache than the 2 MB default: lists and packs read thousands of cells.
      db.pragma('cache_size = -32000');
      if (!options.readonly) {
        db.pragma('journal_mode = WAL');
        registry.migrate();
      }
      return registry;
    } catch (e) {
      db?.close();
      throw registryError(e, path, 'opening it');
    }
  }

  private migrate(): void {
    const version = this.db.pragma('user_version', { simple: true }) as number;
    if (version > MIGRATIONS.length)
      throw makeError(
        ErrorCodes.REGISTRY_OPEN,
        `the registry has schema version ${version}, newer than this cellvigil knows (${MIGRATIONS.length})`,
        this.path,
        'Use the cellvigil that made it, or rebuild a registry of your own from the run folders.',
      );
    const apply = this.db.transaction(() => {
      for (let v = version; v < MIGRATIONS.length; v++) {
        this.db.exec(MIGRATIONS[v]!);
        this.db.pragma(`user_version = ${v + 1}`);
      }
    });
    if (version < MIGRATIONS.length) apply.immediate();
  }

  close(): void {
    this.db.close();
  }

  /** Runs `fn` as one write transaction, with SQLite's failures as the product's errors. */
  private write<T>(doing: string, fn: () => T): T {
    try {
      return this.db.transaction(fn).immediate();
    } catch (e) {
      throw registryError(e, this.path, doing);
    }
  }

  private read<T>(doing: string, fn: () => T): T {
    try {
      return fn();
    } catch (e) {
      throw registryError(e, this.path, doing);
    }
  }

  /** Registers cells, all or none: an id already registered (or twice in the list) is refused. */
  addCells(cells: readonly CellInfo[], where: string): void {
    const seen = new Set<string>();
    for (const c of cells) {
      if (seen.has(c.cell_id))
        throw makeError(
          ErrorCodes.REGISTRY_DUPLICATE,
          `cell id ${c.cell_id} is given twice; nothing was registered`,
          where,
          'Give every cell a unique id.',
        );
      seen.add(c.cell_id);
    }
    this.write('registering cells', () => {
      const exists = this.db.prepare('SELECT 1 FROM cells WHERE cell_id = ?').pluck();
      for (const c of cells) {
        if (exists.get(c.cell_id) !== undefined)
          throw makeError(
            ErrorCodes.REGISTRY_DUPLICATE,
            `cell id ${c.cell_id} is already registered; nothing was registered`,
            where,
            'Give the new cell another id (`cellvigil cells show <id>` shows the registered one).',
          );
      }
      const insert = this.db.prepare(
        'INSERT INTO cells (cell_id, chemistry, rated_Ah, source, notes, registered_at) VALUES (@cell_id, @chemistry, @rated_Ah, @source, @notes, @registered_at)',
      );
      for (const c of cells) insert.run(c);
    });
  }

  /** Files runs (a run already filed, by its key, is replaced) and refreshes their cells' summaries. */
  fileRuns(records: readonly RunRecord[]): void {
    if (records.length === 0) return;
    const filedAt = new Date().toISOString();
    this.write('filing runs', () => {
      const file = this.runFiler(filedAt);
      for (const r of records) file(r);
      this.refreshSummaries([...new Set(records.map((r) => r.cell_id))]);
    });
  }

  /** Replaces every run with `records` (a rebuild from the run folders). */
  replaceAllRuns(records: readonly RunRecord[]): void {
    const filedAt = new Date().toISOString();
    this.write('rebuilding the runs', () => {
      this.db.exec('DELETE FROM runs; DELETE FROM cycles; DELETE FROM cell_summary;');
      const file = this.runFiler(filedAt);
      for (const r of records) file(r);
      this.db.exec(`INSERT INTO cell_summary ${SUMMARY_SELECT.replaceAll('%WHERE%', '1')}`);
    });
  }

  /**
   * Files one run's row and its cycles, inside the caller's transaction: the run's cycles are
   * replaced as a whole, so a result filed twice files its cycles once.
   */
  private runFiler(filedAt: string): (r: RunRecord) => void {
    const upsert = this.db.prepare(UPSERT_RUN);
    const drop = this.db.prepare('DELETE FROM cycles WHERE run_key = ?');
    const insert = this.db.prepare(INSERT_CYCLE);
    return (r) => {
      const { cycles, ...row } = r;
      upsert.run({ ...row, full_cycles: r.full_cycles ?? null, filed_at: filedAt });
      drop.run(r.run_key);
      for (const c of cycles ?? []) insert.run({ ...c, run_key: r.run_key });
    };
  }

  private refreshSummaries(ids: readonly string[]): void {
    const del = this.db.prepare('DELETE FROM cell_summary WHERE cell_id = ?');
    const ins = this.db.prepare(
      `INSERT INTO cell_summary ${SUMMARY_SELECT.replaceAll('%WHERE%', 'cell_id = @id')}`,
    );
    for (const id of ids) {
      del.run(id);
      ins.run({ id });
    }
  }

  cell(id: string): CellInfo | null {
    return this.read(
      'reading a cell',
      () =>
        (this.db.prepare('SELECT * FROM cells WHERE cell_id = ?').get(id) as
          CellInfo | undefined) ?? null,
    );
  }

  /** A cell's runs in time order, each program run with its cycles. */
  runsOf(id: string): RunRecord[] {
    return this.read("reading a cell's runs", () => {
      const runs = this.db
        .prepare(`SELECT ${RUN_COLUMNS.join(', ')} FROM runs WHERE cell_id = ? ORDER BY started_ms`)
        .all(id) as RunRecord[];
      const cycles = this.db
        .prepare(
          `SELECT ${CYCLE_COLUMNS.map((c) => `y.${c}`).join(', ')} FROM cycles y
           JOIN runs r ON r.run_key = y.run_key WHERE r.cell_id = ? ORDER BY y.run_key, y.segment`,
        )
        .all(id) as Array<CycleRecord & { run_key: string }>;
      const byRun = new Map<string, CycleRecord[]>();
      for (const { run_key, ...c } of cycles)
        byRun.set(run_key, [...(byRun.get(run_key) ?? []), c]);
      return runs.map((r) => {
        const own = byRun.get(r.run_key);
        if (r.full_cycles === null) delete r.full_cycles;
        return r.full_cycles === undefined ? r : { ...r, cycles: own ?? [] };
      });
    });
  }

  /**
   * Grading's summary of the runs of many cells, worked out inside SQLite (one row per cell
   * instead of one per run): the same tests as runDoubts in grading.ts, checked against it in
   * the tests.
   */
  trustSummaries(ids: readonly string[], trust: TrustRules): Map<string, TrustSummary> {
    return this.read("summing up cells' runs", () => {
      const rows = this.db
        .prepare(
          // SQLite gives the bare columns of the row where max() found its value: the latest
          // run that counts (one pass, no window, no sort; the rows come in key order).
          `SELECT cell_id, count(*), sum(ok), sum(i), sum(c), sum(u),
                  max(CASE WHEN ok THEN started_ms END), end_reason, calibration_id, capacity_Ah,
                  capacity_u_Ah, dc_resistance_ohm, full_cycles
           FROM (SELECT *, NOT (i OR c OR u) AS ok FROM (
             SELECT cell_id, started_ms, end_reason, calibration_id, capacity_Ah, capacity_u_Ah,
                    dc_resistance_ohm, full_cycles,
                    NOT ${MEASURED_SQL} AS i,
                    (@cal AND calibration_id = 'none') AS c,
                    (capacity_u_Ah IS NULL OR NOT capacity_Ah > 0
                      OR 2.0 * capacity_u_Ah / capacity_Ah > @maxrel) AS u
             FROM runs WHERE cell_id IN (SELECT value FROM json_each(@ids))))
           GROUP BY cell_id`,
        )
        .raw()
        .all({
          ids: JSON.stringify(ids),
          cal: trust.require_calibration ? 1 : 0,
          maxrel: trust.max_relative_uncertainty,
        }) as SummaryRow[];
      const out = new Map<string, TrustSummary>();
      for (const [
        cell_id,
        runs,
        trusted,
        i,
        c,
        u,
        started,
        end,
        cal,
        cap,
        capU,
        res,
        full,
      ] of rows) {
        const flags = [i, c, u];
        out.set(cell_id, {
          runs,
          trusted,
          latest:
            started === null
              ? null
              : {
                  cell_id,
                  started_ms: started,
                  end_reason: end!,
                  calibration_id: cal!,
                  capacity_Ah: cap!,
                  capacity_u_Ah: capU,
                  dc_resistance_ohm: res,
                  full_cycles: full,
                },
          doubts: RUN_DOUBTS.filter((_, k) => flags[k]! > 0),
        });
      }
      return out;
    });
  }

  /** Registered cells matching `filter`, sorted (never-tested cells last), at most `limit`. */
  listCells(
    filter: CellFilter,
    sort: CellSortKey = 'id',
    descending = false,
    limit = -1,
  ): CellListRow[] {
    const where: string[] = [];
    const p: Record<string, number | string> = {};
    const add = (sql: string, key: string, value: number | string | undefined): void => {
      if (value === undefined) return;
      where.push(sql);
      p[key] = value;
    };
    add('c.chemistry = @chemistry', 'chemistry', filter.chemistry);
    add('s.capacity_Ah >= @minCap', 'minCap', filter.minCapacityAh);
    add('s.capacity_Ah <= @maxCap', 'maxCap', filter.maxCapacityAh);
    add('s.dc_resistance_ohm >= @minR', 'minR', filter.minResistanceOhm);
    add('s.dc_resistance_ohm <= @maxR', 'maxR', filter.maxResistanceOhm);
    add('soh >= @minSoh', 'minSoh', filter.minSoh);
    add('soh <= @maxSoh', 'maxSoh', filter.maxSoh);
    add('s.last_tested_ms >= @after', 'after', filter.testedAfterMs);
    add('s.last_tested_ms < @before', 'before', filter.testedBeforeMs);
    if (filter.untested) where.push('s.last_tested_ms IS NULL');
    const sql = `SELECT c.*, coalesce(s.runs, 0) AS runs, s.last_tested_ms, s.capacity_Ah,
        s.capacity_u_Ah, s.dc_resistance_ohm, s.capacity_Ah / c.rated_Ah AS soh
      FROM cells c LEFT JOIN cell_summary s ON s.cell_id = c.cell_id
      ${where.length > 0 ? `WHERE ${where.join(' AND ')}` : ''}
      ORDER BY ${SORT_SQL[sort]} ${descending ? 'DESC' : 'ASC'} NULLS LAST, c.cell_id
      LIMIT ${Math.trunc(limit)}`;
    return this.read('listing cells', () => this.db.prepare(sql).all(p) as CellListRow[]);
  }

  /** Every run in cell and time order, one at a time (for exports of any size). */
  *allRuns(): IterableIterator<RunRecord> {
    const stmt = this.db.prepare(
      `SELECT ${RUN_COLUMNS.join(', ')} FROM runs ORDER BY cell_id, started_ms`,
    );
    yield* stmt.iterate() as IterableIterator<RunRecord>;
  }

  /** Cell ids that have runs but are not registered. */
  unregisteredWithRuns(): string[] {
    return this.read(
      'listing unregistered cells',
      () =>
        this.db
          .prepare(
            'SELECT s.cell_id FROM cell_summary s LEFT JOIN cells c ON c.cell_id = s.cell_id WHERE c.cell_id IS NULL ORDER BY s.cell_id',
          )
          .pluck()
          .all() as string[],
    );
  }

  counts(): { cells: number; runs: number } {
    return this.read('counting', () => ({
      cells: this.db.prepare('SELECT count(*) FROM cells').pluck().get() as number,
      runs: this.db.prepare('SELECT count(*) FROM runs').pluck().get() as number,
    }));
  }
}
