/**
 * Figure 5, soak: 24 hours of frames at 20 a second (1.7 million) fed as fast as possible
 * through the session, pipeline, sample and event logs and the live hub, on virtual time.
 * Resident memory is sampled along the way: it must stay flat (least-squares slope) and under
 * 120 MB. Baseline: resident memory after start-up.
 */
import { mkdirSync, mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { linearRegression } from 'simple-statistics';
import {
  argValue,
  BENCH_CELL,
  BENCH_DIR,
  benchCalibration,
  benchChain,
  collect,
  CoreRun,
  fmt,
  FrameMaker,
  memory,
  nextTick,
  product,
  reportFigure,
  type CodecModule,
  type LiveHubModule,
  type LiveLinkModule,
} from './bench-kit.js';

const FRAMES = Number(argValue('frames') ?? 1_700_000);
const FRAME_MS = 50;
/**
 * Rows are written every CHUNK frames (50 s of the simulated run; the daemon writes every
 * second of its real one), so the writer never holds more than a live run's 50 s of rows.
 */
const CHUNK = 1000;
const SAMPLE_EVERY = 50_000;
const MAX_RSS_MB = 120;
/** Flat: the fitted slope may add at most 5 MB over the whole soak (GC sawtooth aside). */
const MAX_SLOPE_MB_PER_M = 3;

async function main(): Promise<void> {
  mkdirSync(BENCH_DIR, { recursive: true });
  const work = mkdtempSync(join(BENCH_DIR, 'soak-'));
  try {
    const codec = await product<CodecModule>('protocol/codec.js');
    const { LiveHub } = await product<LiveHubModule>('live/live-hub.js');
    const { toLiveSample } = await product<LiveLinkModule>('run/live-link.js');
    const calibration = await benchCalibration(join(work, 'bench-rig.cal.json'));
    const folder = join(work, 'run');
    mkdirSync(folder);
    const run = await CoreRun.create(folder, calibration, Date.parse('2026-11-21T18:00:00.000Z'));
    const frames = new FrameMaker(await benchChain(), codec.encodeDataFrame);
    // The live feed's share of the work without sockets: the hub, and one subscriber that
    // serialises each message as the server does once for all its viewers.
    const hub = new LiveHub();
    let broadcastBytes = 0;
    hub.subscribe((m) => {
      broadcastBytes += JSON.stringify(m).length;
    });

    collect();
    const start = memory();
    // Each point is read twice: as the run left it (for the peak) and after a full collection
    // (for the slope), so the slope follows what is kept rather than when the collector ran.
    const points: Array<{
      frames: number;
      rssMB: number;
      heapMB: number;
      keptRssMB: number;
      keptHeapMB: number;
    }> = [{ frames: 0, ...start, keptRssMB: start.rssMB, keptHeapMB: start.heapMB }];
    const sample = (frames: number): void => {
      const now = memory();
      collect();
      const kept = memory();
      points.push({ frames, ...now, keptRssMB: kept.rssMB, keptHeapMB: kept.heapMB });
    };
    const { restV, celsius } = BENCH_CELL;
    // A slow discharge (our own demo curve): 0.1 A for a day, 4.05 V falling to about 3.2 V.
    const loadA = 0.1;
    const t0 = performance.now();
    let at = 0;
    let lastState = '';
    for (let i = 0; i < FRAMES; i++) {
      at += FRAME_MS;
      const f = i / FRAMES;
      const on = run.rigLoadOn;
      const line = on
        ? frames.line(4.05 - 0.7 * f - 0.15 * f ** 8, loadA, celsius + 1.5 * f, true)
        : frames.line(restV, 0, celsius, false);
      const row = run.line(line.slice(0, -1), at);
      if (row) lastState = row.state;
      if (row) hub.sample(toLiveSample(row, on));
      if (i % 2 === 1) run.tick(at);
      if ((i + 1) % CHUNK === 0) {
        // Waits for the previous write first, so what waits for the disk stays bounded.
        await run.flush();
        await nextTick();
      }
      if ((i + 1) % SAMPLE_EVERY === 0) sample(i + 1);
    }
    run.stop(at);
    await run.close();
    const elapsedS = (performance.now() - t0) / 1000;
    const files = readdirSync(folder).filter((n) => n.startsWith('samples-')).length;

    // The first tenth settles the heap to its working size; flatness is judged on the rest.
    const settled = points.filter((p) => p.frames >= FRAMES / 10);
    const slope = linearRegression(settled.map((p) => [p.frames / 1e6, p.keptRssMB])).m;
    const heapSlope = linearRegression(settled.map((p) => [p.frames / 1e6, p.keptHeapMB])).m;
    const peak = Math.max(...points.map((p) => p.rssMB));
    // Honest only if every frame made a row and the session was discharging at the end.
    const pass =
      peak < MAX_RSS_MB &&
      slope <= MAX_SLOPE_MB_PER_M &&
      run.rows === FRAMES &&
      lastState === 'discharging';
    reportFigure({
      figure: 'soak',
      title: 'Soak: 24 h at 20 frames/s (1.7 M frames) through pipeline, logs and hub',
      measured: peak,
      baseline: start.rssMB,
      unit: 'MB',
      ratio: peak / start.rssMB,
      measuredText: `peak ${fmt(peak, 1)} MB, slope ${fmt(slope, 2)} MB/M frames`,
      baselineText: `${fmt(start.rssMB, 1)} MB at start`,
      target: `peak < ${MAX_RSS_MB} MB, slope ≤ ${MAX_SLOPE_MB_PER_M} MB/M`,
      pass,
      details: {
        frames: FRAMES,
        virtual_hours: (FRAMES * FRAME_MS) / 3_600_000,
        elapsed_s: elapsedS,
        frames_per_s: FRAMES / elapsedS,
        rows_written: run.rows,
        sample_files: files,
        last_row_state: lastState,
        charge_Ah: run.session.integrator.chargeAh,
        rss_slope_MB_per_M_frames: slope,
        heap_slope_MB_per_M_frames: heapSlope,
        broadcast_MB: broadcastBytes / 1e6,
        samples: points.map((p) => ({
          frames: p.frames,
          rss_MB: Number(p.rssMB.toFixed(1)),
          heap_MB: Number(p.heapMB.toFixed(1)),
          kept_rss_MB: Number(p.keptRssMB.toFixed(1)),
          kept_heap_MB: Number(p.keptHeapMB.toFixed(1)),
        })),
      },
    });
  } finally {
    rmSync(work, { recursive: true, force: true });
  }
}

main().catch((e: unknown) => {
  console.error(`bench-soak: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
