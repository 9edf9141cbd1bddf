/**
 * Figure 2, replay: the report's recompute of a large run folder (2 million rows over several
 * rotated sample files, made once by the product's own pipeline and log writer and kept in
 * .bench/data/), against a bare count of the lines of the same files with node:readline.
 * Target: at least 0.4 of the bare rate.
 */
import { once } from 'node:events';
import {
  createReadStream,
  existsSync,
  mkdirSync,
  readdirSync,
  readFileSync,
  rmSync,
  statSync,
  writeFileSync,
} from 'node:fs';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { createInterface } from 'node:readline';
import {
  argValue,
  BENCH_CELL,
  BENCH_DIR,
  benchCalibration,
  benchChain,
  CoreRun,
  fmt,
  FrameMaker,
  nextTick,
  product,
  reportFigure,
  type CodecModule,
  type RecomputeModule,
  type RunFolderModule,
} from './bench-kit.js';

const ROWS = Number(argValue('rows') ?? 2_000_000);
const ROUNDS = Number(argValue('rounds') ?? 3);
/** Bump when the generated data changes, so an old cache is not reused. */
const DATA_VERSION = 2;
const DATA_DIR = join(BENCH_DIR, 'data', `replay-${ROWS}`);
const RUN_DIR = join(DATA_DIR, 'run');
const MARKER = join(DATA_DIR, 'bench-data.json');

interface Marker {
  version: number;
  rows: number;
}

/** A day-long discharge at 20 frames a second (our own demo curve), written as the daemon writes it. */
async function generate(): Promise<void> {
  rmSync(DATA_DIR, { recursive: true, force: true });
  mkdirSync(RUN_DIR, { recursive: true });
  const codec = await product<CodecModule>('protocol/codec.js');
  const calibration = await benchCalibration(join(DATA_DIR, 'bench-rig.cal.json'));
  const run = await CoreRun.create(RUN_DIR, calibration, Date.parse('2026-11-14T07:30:00.000Z'));
  const frames = new FrameMaker(await benchChain(), codec.encodeDataFrame);
  const { restV, celsius } = BENCH_CELL;
  let at = 0;
  for (let i = 0; run.rows < ROWS; i++) {
    at += 50;
    const f = run.rows / ROWS;
    const line = run.rigLoadOn
      ? frames.line(4.02 - 0.6 * f - 0.25 * f ** 10, 0.12, celsius + 2 * f, true)
      : frames.line(restV, 0, celsius, false);
    run.line(line.slice(0, -1), at);
    if (i % 2 === 1) run.tick(at);
    if (i % 20_000 === 19_999) {
      await run.flush();
      await nextTick();
    }
  }
  // The stop, the rig's load going off and the frame that confirms it, as in a real run's end.
  run.stop(at);
  for (let k = 0; k < 3 && !run.ended; k++) {
    at += 50;
    run.line(frames.line(restV - 0.1, 0, celsius, run.rigLoadOn).slice(0, -1), at);
  }
  await run.close();
  writeFileSync(MARKER, JSON.stringify({ version: DATA_VERSION, rows: run.rows } satisfies Marker));
}

function cached(): boolean {
  if (!existsSync(MARKER)) return false;
  const m = JSON.parse(readFileSync(MARKER, 'utf8')) as Marker;
  return m.version === DATA_VERSION && m.rows >= ROWS;
}

function sampleFiles(): string[] {
  return readdirSync(RUN_DIR)
    .filter((n) => /^samples-\d{4}\.csv$/.test(n))
    .sort()
    .map((n) => join(RUN_DIR, n));
}

/** Lines of every sample file, counted by readline and nothing else. */
async function bareCount(files: string[]): Promise<{ lines: number; seconds: number }> {
  const t0 = performance.now();
  let lines = 0;
  for (const f of files) {
    const rl = createInterface({ input: createReadStream(f), crlfDelay: Infinity });
    rl.on('line', () => {
      lines++;
    });
    await once(rl, 'close');
  }
  return { lines, seconds: (performance.now() - t0) / 1000 };
}

async function recompute(): Promise<{ rows: number; seconds: number; capacityAh: number }> {
  const { openRunFolder } = await product<RunFolderModule>('replay/run-folder.js');
  const { recomputeRun } = await product<RecomputeModule>('report/recompute.js');
  const t0 = performance.now();
  const run = await openRunFolder(RUN_DIR);
  const figures = await recomputeRun(run);
  return {
    rows: figures.result.recomputed.from_rows,
    seconds: (performance.now() - t0) / 1000,
    capacityAh: figures.result.capacity_Ah,
  };
}

async function main(): Promise<void> {
  let generatedS: number | null = null;
  if (!cached()) {
    const t0 = performance.now();
    await generate();
    generatedS = (performance.now() - t0) / 1000;
  }
  const files = sampleFiles();
  const bytes = files.reduce((t, f) => t + statSync(f).size, 0);
  await bareCount(files); // into the page cache, so both sides read from memory
  const bare: Array<{ lines: number; seconds: number }> = [];
  const full: Array<{ rows: number; seconds: number; capacityAh: number }> = [];
  for (let r = 0; r < ROUNDS; r++) {
    bare.push(await bareCount(files));
    full.push(await recompute());
  }
  const bareRate = Math.max(...bare.map((b) => b.lines / b.seconds));
  const best = full.reduce((a, b) => (b.rows / b.seconds > a.rows / a.seconds ? b : a));
  const rate = best.rows / best.seconds;
  const ratio = rate / bareRate;
  reportFigure({
    figure: 'replay',
    title: 'Replay: report recompute of a 2 M-row run folder vs bare readline line count',
    measured: rate,
    baseline: bareRate,
    unit: 'rows/s',
    ratio,
    measuredText: `${fmt(rate / 1000, 0)} k rows/s`,
    baselineText: `${fmt(bareRate / 1000, 0)} k lines/s`,
    target: 'ratio ≥ 0.40',
    pass: ratio >= 0.4 && best.rows >= ROWS,
    details: {
      rows: best.rows,
      sample_files: files.length,
      sample_MB: bytes / 1e6,
      generated_s: generatedS,
      recompute_s: full.map((f) => Number(f.seconds.toFixed(2))),
      bare_count_s: bare.map((b) => Number(b.seconds.toFixed(2))),
      capacity_Ah: best.capacityAh,
    },
  });
}

main().catch((e: unknown) => {
  console.error(`bench-replay: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
