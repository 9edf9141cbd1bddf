/**
 * Figures 7 to 10, the cell registry and pack building, on a registry of 20 000 cells and
 * 200 000 runs made by the product's own filing (kept in .bench/data/):
 * - history: one cell's history as `cells show` makes it (open, read, fit, close), against a
 *   bare prepared SELECT of the same cell's runs; target under 5 ms (median of 200 cells);
 * - list: a filtered, graded list of about 1 000 cells as `cells list` makes it, against a bare
 *   SELECT of the same rows; target under 50 ms (median of 20);
 * - rebuild: run folders a second filed by `cells rebuild` from 10 000 run folders, against a
 *   bare read and JSON.parse of their result.json files at the same concurrency; target at
 *   least 0.25 of the bare rate;
 * - pack: a 14 × 100 pack from the 2 000 cells of one chemistry as `pack` makes it, against the
 *   graded list of those cells alone; target under 2 s with a group spread within 0.1 % of the
 *   mean group above the lower bound.
 */
import { existsSync, mkdirSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import Database from 'better-sqlite3';
import { argValue, BENCH_DIR, fmt, product, type Figure } from './bench-kit.js';

type Queries = typeof import('../src/registry/cell-queries.js');
type Db = typeof import('../src/registry/registry-db.js');
type Rules = typeof import('../src/registry/grade-rules.js');
type Rebuild = typeof import('../src/registry/rebuild.js');
type RunRecord = import('../src/registry/run-record.js').RunRecord;

const CELLS = Number(argValue('cells') ?? 20_000);
const RUNS_PER_CELL = Number(argValue('runs-per-cell') ?? 10);
const FOLDERS = Number(argValue('folders') ?? 10_000);
/** Bump when the generated data changes, so an old cache is not reused. */
const DATA_VERSION = 3;
const DATA_DIR = join(BENCH_DIR, 'data', `registry-${CELLS}x${RUNS_PER_CELL}-${FOLDERS}`);
const DB = join(DATA_DIR, 'registry.sqlite');
const RUNS_DIR = join(DATA_DIR, 'runs');
const MARKER = join(DATA_DIR, 'bench-data.json');
const YEAR = 365.25 * 86_400_000;
const T0 = Date.parse('2020-01-06T08:00:00.000Z');

/** Our own demo population: 10 % LiFePO4 (the pack pool, fading by 0.5–1.5 % a year), the rest Li-ion (2–8 %). */
function population(): {
  cells: Array<{
    id: string;
    chemistry: string;
    rated: number;
    c0: number;
    fade: number;
    r0: number;
  }>;
} {
  let s = 12345;
  const rnd = (): number => (s = (s * 1103515245 + 12345) % 2147483648) / 2147483648;
  return {
    cells: Array.from({ length: CELLS }, (_, i) => {
      const chemistry = i % 10 === 0 ? 'lifepo4' : 'li-ion';
      const rated = chemistry === 'lifepo4' ? 1.5 : 2.6;
      return {
        id: `B${String(i).padStart(5, '0')}`,
        chemistry,
        rated,
        c0: rated * (chemistry === 'lifepo4' ? 0.92 + 0.12 * rnd() : 0.88 + 0.14 * rnd()),
        fade: rated * (chemistry === 'lifepo4' ? 0.005 + 0.01 * rnd() : 0.02 + 0.06 * rnd()),
        r0: chemistry === 'lifepo4' ? 0.015 + 0.02 * rnd() : 0.025 + 0.03 * rnd(),
      };
    }),
  };
}

function record(c: ReturnType<typeof population>['cells'][number], k: number): RunRecord {
  const t = T0 + k * 0.5 * YEAR + Number(c.id.slice(1)) * 60_000;
  const cap = Math.round((c.c0 - c.fade * k * 0.5) * 1e6) / 1e6;
  const started = new Date(t).toISOString();
  return {
    run_key: `${c.id}@${started}`,
    cell_id: c.id,
    folder: `${started.slice(0, 19).replace(/[-:]/g, '').replace('T', '-')}-${c.id}`,
    started_ms: t,
    started_wall: started,
    ended_wall: new Date(t + 5 * 3_600_000).toISOString(),
    end_reason: 'cutoff',
    chemistry: c.chemistry,
    cells: 1,
    capacity_Ah: cap,
    capacity_u_Ah: cap * 0.004,
    energy_Wh: cap * 3.6,
    energy_u_Wh: cap * 0.015,
    dc_resistance_ohm: c.r0 * (1 + 0.05 * k),
    mean_voltage_V: 3.6,
    end_voltage_V: 3.0,
    mean_current_A: cap / 5,
    temperature_C: 24,
    duration_s: 18_000,
    calibration_id: '0123456789abcdef',
  };
}

async function generate(db: Db): Promise<void> {
  rmSync(DATA_DIR, { recursive: true, force: true });
  mkdirSync(RUNS_DIR, { recursive: true });
  const pop = population();
  const reg = db.Registry.open(DB);
  reg.addCells(
    pop.cells.map((c) => ({
      cell_id: c.id,
      chemistry: c.chemistry,
      rated_Ah: c.rated,
      source: 'bench lot',
      notes: '',
      registered_at: new Date(T0).toISOString(),
    })),
    'bench',
  );
  const records: RunRecord[] = [];
  for (const c of pop.cells) for (let k = 0; k < RUNS_PER_CELL; k++) records.push(record(c, k));
  reg.replaceAllRuns(records);
  reg.close();
  // Run folders for the rebuild: result.json as a finished run leaves it, with its cell id.
  for (let i = 0; i < FOLDERS; i++) {
    const r = records[i]!;
    const dir = join(RUNS_DIR, r.folder);
    mkdirSync(dir);
    writeFileSync(
      join(dir, 'result.json'),
      `${JSON.stringify(
        {
          capacity_Ah: r.capacity_Ah,
          energy_Wh: r.energy_Wh,
          duration_s: r.duration_s,
          end_reason: r.end_reason,
          end_detail: 'cutoff reached',
          load_off_confirmed: true,
          mean_voltage_V: r.mean_voltage_V,
          end_voltage_V: r.end_voltage_V,
          cutoff_V: 3,
          open_circuit_V: 4.15,
          dc_resistance_ohm: r.dc_resistance_ohm,
          chemistry: r.chemistry,
          cells: 1,
          frames_accepted: 180_000,
          frames_rejected: 0,
          frames_lost: 0,
          gaps: 0,
          bridged_Ah: 0,
          rig_clock_error_ppm: 150,
          rig_clock_warning: false,
          calibration_id: r.calibration_id,
          started_wall: r.started_wall,
          ended_wall: r.ended_wall,
          schedule: null,
          service_output_h: null,
          uncertainty: {
            capacity_Ah: { standard: r.capacity_u_Ah, expanded: 2 * r.capacity_u_Ah!, k: 2 },
            energy_Wh: { standard: r.energy_u_Wh, expanded: 2 * r.energy_u_Wh!, k: 2 },
          },
          cell_id: r.cell_id,
        },
        null,
        2,
      )}\n`,
    );
  }
  writeFileSync(MARKER, JSON.stringify({ version: DATA_VERSION }));
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

function timed<T>(fn: () => T): [number, T] {
  const t0 = performance.now();
  const out = fn();
  return [performance.now() - t0, out];
}

function figure(
  key: string,
  title: string,
  measured: number,
  baseline: number,
  unit: string,
  target: string,
  pass: boolean,
  details: Record<string, unknown>,
): Figure {
  return {
    figure: key,
    title,
    measured,
    baseline,
    unit,
    ratio: measured / baseline,
    measuredText: `${fmt(measured, unit === 'ms' ? 2 : 0)} ${unit}`,
    baselineText: `${fmt(baseline, unit === 'ms' ? 2 : 0)} ${unit}`,
    target,
    pass,
    details,
  };
}

async function main(): Promise<void> {
  const db = await product<Db>('registry/registry-db.js');
  const queries = await product<Queries>('registry/cell-queries.js');
  const rules = await (await product<Rules>('registry/grade-rules.js')).loadGradeRules();
  const rebuild = await product<Rebuild>('registry/rebuild.js');
  const fresh =
    existsSync(MARKER) &&
    (JSON.parse(readFileSync(MARKER, 'utf8')) as { version: number }).version === DATA_VERSION;
  if (!fresh) {
    process.stderr.write(
      `bench registry: making ${CELLS} cells, ${CELLS * RUNS_PER_CELL} runs and ${FOLDERS} run folders…\n`,
    );
    await generate(db);
  }
  const figures: Figure[] = [];
  const raw = new Database(DB, { readonly: true });
  const bareRuns = raw.prepare('SELECT * FROM runs WHERE cell_id = ? ORDER BY started_ms');

  // History: 200 cells spread over the registry, each read once by each side, in turn.
  const ids = Array.from(
    { length: 200 },
    (_, i) => `B${String((i * 997) % CELLS).padStart(5, '0')}`,
  );
  queries.showCell(DB, ids[0]!, rules);
  const hist: number[] = [];
  const bare: number[] = [];
  for (const id of ids) {
    hist.push(timed(() => queries.showCell(DB, id, rules))[0]);
    bare.push(timed(() => bareRuns.all(id))[0]);
  }
  const h = median(hist);
  figures.push(
    figure('registry-history', "One cell's history", h, median(bare), 'ms', 'under 5 ms', h < 5, {
      cells: CELLS,
      runs: CELLS * RUNS_PER_CELL,
      p90_ms: [...hist].sort((a, b) => a - b)[Math.floor(hist.length * 0.9)],
    }),
  );

  // List: Li-ion cells at 82–86 % health whose latest resistance is at most 60 mΩ, by capacity.
  const request = {
    filter: { chemistry: 'li-ion', minSoh: 0.82, maxSoh: 0.86, maxResistanceOhm: 0.06 },
    sort: 'capacity' as const,
    descending: true,
  };
  const bareList = raw.prepare(
    `SELECT c.*, s.* FROM cells c JOIN cell_summary s ON s.cell_id = c.cell_id
     WHERE c.chemistry = 'li-ion' AND s.capacity_Ah / c.rated_Ah BETWEEN 0.82 AND 0.86 AND s.dc_resistance_ohm <= 0.06
     ORDER BY s.capacity_Ah DESC`,
  );
  const listT: number[] = [];
  const bareT: number[] = [];
  let listed = 0;
  for (let i = 0; i < 21; i++) {
    const [t, rows] = timed(() => queries.listGraded(DB, request, rules));
    listed = rows.length;
    if (i > 0) listT.push(t);
    const [b] = timed(() => bareList.all());
    if (i > 0) bareT.push(b);
  }
  const l = median(listT);
  figures.push(
    figure(
      'registry-list',
      'A filtered, graded list',
      l,
      median(bareT),
      'ms',
      'under 50 ms, about 1 000 cells',
      l < 50,
      { cells_listed: listed },
    ),
  );
  raw.close();

  // Rebuild against a bare read of the same result files, in turn, best of two each.
  const scratch = join(DATA_DIR, 'rebuilt.sqlite');
  const folders = readdirSync(RUNS_DIR).map((n) => join(RUNS_DIR, n, 'result.json'));
  const bareRead = async (): Promise<number> => {
    const t0 = performance.now();
    let next = 0;
    const worker = async (): Promise<void> => {
      while (next < folders.length) JSON.parse(await readFile(folders[next++]!, 'utf8'));
    };
    await Promise.all(Array.from({ length: 16 }, worker));
    return folders.length / ((performance.now() - t0) / 1000);
  };
  const rebuilt = async (): Promise<number> => {
    rmSync(scratch, { force: true });
    rmSync(`${scratch}-wal`, { force: true });
    rmSync(`${scratch}-shm`, { force: true });
    const t0 = performance.now();
    const report = await rebuild.rebuildRegistry(scratch, [RUNS_DIR]);
    if (report.filed !== folders.length)
      throw new Error(`rebuild filed ${report.filed} of ${folders.length}`);
    return folders.length / ((performance.now() - t0) / 1000);
  };
  let rb = 0;
  let br = 0;
  for (let round = 0; round < 2; round++) {
    br = Math.max(br, await bareRead());
    rb = Math.max(rb, await rebuilt());
  }
  figures.push(
    figure(
      'registry-rebuild',
      'Rebuild from run folders',
      rb,
      br,
      'folders/s',
      'at least 0.25 of the bare read',
      rb / br >= 0.25,
      { folders: folders.length },
    ),
  );

  // Pack: 14 × 100 from the 2 000 LiFePO4 cells.
  const packReq = { filter: { chemistry: 'lifepo4' }, series: 14, parallel: 100 };
  const [listMs] = timed(() => queries.listGraded(DB, packReq, rules));
  const [packMs, plan] = timed(() => queries.buildPack(DB, packReq, rules));
  const excess = (plan.spread_Ah - plan.lower_bound_Ah) / plan.mean_group_Ah;
  figures.push(
    figure(
      'pack',
      '14 × 100 pack from 2 000 cells',
      packMs,
      listMs,
      'ms',
      'under 2 s; spread within 0.1 % of the mean above the bound',
      packMs < 2000 && excess <= 0.001,
      {
        eligible: plan.eligible,
        spread_mAh: plan.spread_Ah * 1000,
        lower_bound_mAh: plan.lower_bound_Ah * 1000,
        mean_group_Ah: plan.mean_group_Ah,
        excess_share_of_mean: excess,
        resistance_spread_mohm:
          plan.resistance_spread_ohm === null ? null : plan.resistance_spread_ohm * 1000,
      },
    ),
  );
  for (const f of figures)
    process.stderr.write(
      `bench registry: ${f.figure} ${f.measuredText} (baseline ${f.baselineText}) ${JSON.stringify(f.details)}\n`,
    );
  // Several figures from one script: the runner takes an array as well as a single figure.
  const out = argValue('out');
  if (out) writeFileSync(out, JSON.stringify(figures, null, 2));
  else console.log(JSON.stringify(figures, null, 2));
}

main().catch((e: unknown) => {
  console.error(`bench registry: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
