/**
 * Figure 6, station: 8 rigs × 8 channels at 20 frames/s per channel (1 280 frames/s) over
 * pseudo-terminals, every row logged, against the one-channel daemon at the same total frame
 * rate in the same run. Measured in this process (the daemon under test runs here; the rigs
 * run in a child, scripts/bench-station-feeder.ts): CPU time per frame, the daemon's share of
 * one core, event-loop delay p99 and resident memory. Targets: CPU per frame ≤ 1.2 × the
 * one-channel daemon's, p99 ≤ 20 ms, RSS ≤ 200 MB.
 */
import { fork } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { monitorEventLoopDelay, performance } from 'node:perf_hooks';
import { fileURLToPath } from 'node:url';
import type { ParentToStationFeeder, StationFeederToParent } from './bench-station-feeder.js';
import {
  argValue,
  BENCH_DIR,
  fmt,
  MB,
  nullStream,
  product,
  reportFigure,
  sleep,
  startPtyPair,
  type DaemonModule,
  type PtyPair,
} from './bench-kit.js';

type StationDaemonModule = typeof import('../src/station/station-daemon.js');
type ChannelRunModule = typeof import('../src/cli/station-runner.js');

const RIGS = Number(argValue('rigs') ?? 8);
const CHANNELS = Number(argValue('channels') ?? 8);
const RATE = Number(argValue('rate') ?? 20);
const WINDOW_S = Number(argValue('seconds') ?? 20);
/** Long enough for the JIT to have settled on the hot paths of 64 channels. */
const WARMUP_S = 10;
const FEEDER = fileURLToPath(new URL('./bench-station-feeder.js', import.meta.url));
const MAX_CPU_RATIO = 1.2;
const MAX_P99_MS = 20;
const MAX_RSS_MB = 200;

interface Feeder {
  counts(): Promise<Extract<StationFeederToParent, { type: 'counts' }>>;
  finish(): Promise<void>;
}

async function startFeeder(ports: string[], channels: number, rate: number): Promise<Feeder> {
  const child = fork(
    FEEDER,
    ['--ports', ports.join(','), '--channels', String(channels), '--rate', String(rate)],
    { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] },
  );
  const waiting: Array<(m: StationFeederToParent) => void> = [];
  child.on('message', (m: StationFeederToParent) => waiting.shift()?.(m));
  const next = (): Promise<StationFeederToParent> => new Promise((r) => waiting.push(r));
  const tell = (m: ParentToStationFeeder): void => void child.send(m);
  await next();
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  return {
    counts: async () => {
      const reply = next();
      tell({ type: 'count' });
      return (await reply) as Extract<StationFeederToParent, { type: 'counts' }>;
    },
    finish: async () => {
      tell({ type: 'finish' });
      await exited;
    },
  };
}

interface Measured {
  frames: number;
  framesPerS: number;
  cpuShare: number;
  /** Of the CPU share, the part spent in the kernel (reads, writes, fsync). */
  systemShare: number;
  cpuPerFrameUs: number;
  p99Ms: number;
  maxMs: number;
  rssMaxMB: number;
}

/** Waits for every load to be on, lets it settle, then measures a window of WINDOW_S. */
async function measure(feeder: Feeder, loads: number): Promise<Measured> {
  const until = Date.now() + 60_000;
  while ((await feeder.counts()).loadsOn < loads) {
    if (Date.now() > until) throw new Error(`only some loads went on (want ${loads})`);
    await sleep(200);
  }
  await sleep(WARMUP_S * 1000);
  const delay = monitorEventLoopDelay({ resolution: 10 });
  const c0 = await feeder.counts();
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  delay.enable();
  let rssMax = 0;
  const end = t0 + WINDOW_S * 1000;
  while (performance.now() < end) {
    rssMax = Math.max(rssMax, process.memoryUsage.rss());
    await sleep(250);
  }
  delay.disable();
  const cpu = process.cpuUsage(cpu0);
  const wallMs = performance.now() - t0;
  const c1 = await feeder.counts();
  const frames = c1.frames - c0.frames;
  const cpuMs = (cpu.user + cpu.system) / 1000;
  return {
    frames,
    framesPerS: frames / (wallMs / 1000),
    cpuShare: cpuMs / wallMs,
    systemShare: cpu.system / 1000 / wallMs,
    cpuPerFrameUs: (cpuMs * 1000) / frames,
    p99Ms: delay.percentile(99) / 1e6,
    maxMs: delay.max / 1e6,
    rssMaxMB: rssMax / MB,
  };
}

async function oneChannel(pty: PtyPair, work: string): Promise<Measured> {
  const { startRun } = await product<DaemonModule>('run/daemon.js');
  const runs = mkdtempSync(join(work, 'runs-one-'));
  const feeder = await startFeeder([pty.rig], 1, RATE * RIGS * CHANNELS);
  const run = await startRun(
    {
      port: pty.host,
      speed: 1,
      runs,
      listen: null,
      once: true,
      fresh: true,
      linkTimeoutS: 60,
      rotateBytes: 16 * MB,
      channel: 0,
      chemistry: 'li-ion',
      cells: 1,
      label: 'bench-one',
    },
    { out: nullStream(), err: nullStream() },
  );
  const m = await measure(feeder, 1);
  run.stop('the benchmark');
  await run.done;
  await feeder.finish();
  return m;
}

async function station(ptys: PtyPair[], work: string): Promise<Measured> {
  const { startStation } = await product<StationDaemonModule>('station/station-daemon.js');
  const { channelRunner } = await product<ChannelRunModule>('cli/station-runner.js');
  const file = join(work, 'bench-station.yaml');
  const channels = Array.from(
    { length: CHANNELS },
    (_, ch) => `      ${ch}: { chemistry: li-ion }`,
  );
  writeFileSync(
    file,
    [
      `runs: ${join(work, 'runs-station')}`,
      'listen: off',
      'rigs:',
      ...ptys.flatMap((p, i) => [`  r${i}:`, `    port: ${p.host}`, '    channels:', ...channels]),
      '',
    ].join('\n'),
  );
  const feeder = await startFeeder(
    ptys.map((p) => p.rig),
    CHANNELS,
    RATE,
  );
  const handle = await startStation(
    { file, runs: work, listen: null, speed: 1, once: false, fresh: true, linkTimeoutS: 60 },
    { print: () => undefined },
    channelRunner({ print: () => undefined }),
  );
  const m = await measure(feeder, RIGS * CHANNELS);
  await handle.stop('the benchmark');
  await feeder.finish();
  return m;
}

async function main(): Promise<void> {
  mkdirSync(BENCH_DIR, { recursive: true });
  const work = mkdtempSync(join(BENCH_DIR, 'station-'));
  process.env['CELLVIGIL_HOME'] = join(work, 'home');
  const ptys: PtyPair[] = [];
  try {
    for (let i = 0; i < RIGS; i++) {
      const dir = join(work, `pty-${i}`);
      mkdirSync(dir);
      ptys.push(await startPtyPair(dir));
    }
    const one = await oneChannel(ptys[0]!, work);
    const all = await station(ptys, work);
    const ratio = all.cpuPerFrameUs / one.cpuPerFrameUs;
    const pass = ratio <= MAX_CPU_RATIO && all.p99Ms <= MAX_P99_MS && all.rssMaxMB <= MAX_RSS_MB;
    reportFigure({
      figure: 'station',
      title: `Station: ${RIGS} rigs × ${CHANNELS} channels at ${RATE} frames/s each over ptys vs one channel at the same total rate`,
      measured: all.cpuPerFrameUs,
      baseline: one.cpuPerFrameUs,
      unit: 'µs CPU/frame',
      ratio,
      measuredText: `${fmt(all.cpuPerFrameUs, 1)} µs/frame, ${fmt(all.cpuShare * 100, 1)} % CPU, p99 ${fmt(all.p99Ms, 1)} ms, ${fmt(all.rssMaxMB, 0)} MB`,
      baselineText: `${fmt(one.cpuPerFrameUs, 1)} µs/frame, ${fmt(one.cpuShare * 100, 1)} % CPU, p99 ${fmt(one.p99Ms, 1)} ms`,
      target: `ratio ≤ ${MAX_CPU_RATIO}, p99 ≤ ${MAX_P99_MS} ms, RSS ≤ ${MAX_RSS_MB} MB`,
      pass,
      details: { window_s: WINDOW_S, station: all, one_channel: one },
    });
  } finally {
    await Promise.all(ptys.map((p) => p.close()));
    rmSync(work, { recursive: true, force: true });
  }
}

main().catch((e: unknown) => {
  console.error(`bench-station: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
