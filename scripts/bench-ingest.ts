/**
 * Figure 1, ingest: frames written into a pseudo-terminal at full speed, read by the whole
 * daemon (serial source, codec, time base, chain, calibration, session, sample and event logs,
 * its own live feed with one WebSocket viewer), against a bare serialport + readline reader
 * of the same stream that does nothing with the lines. Target: at least half its rate.
 */
import { fork } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { fileURLToPath } from 'node:url';
import { ReadlineParser } from '@serialport/parser-readline';
import { SerialPort } from 'serialport';
import type { FeederToParent, ParentToFeeder } from './bench-feeder.js';
import {
  argValue,
  BENCH_DIR,
  benchCalibration,
  fmt,
  nullStream,
  product,
  reportFigure,
  startPtyPair,
  waitFor,
  type DaemonModule,
  type PtyPair,
} from './bench-kit.js';

const FLOOD = Number(argValue('frames') ?? 150_000);
const REST = 30;
const ROUNDS = Number(argValue('rounds') ?? 4);
const FEEDER = fileURLToPath(new URL('./bench-feeder.js', import.meta.url));

interface Feeder {
  said(type: FeederToParent['type']): Promise<FeederToParent>;
  tell(m: ParentToFeeder): void;
  exited: Promise<void>;
}

function startFeeder(args: string[]): Feeder {
  const child = fork(FEEDER, args, { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
  const got: FeederToParent[] = [];
  const waiters: Array<() => void> = [];
  child.on('message', (m: FeederToParent) => {
    got.push(m);
    waiters.splice(0).forEach((w) => w());
  });
  const exited = new Promise<void>((resolve) => child.once('exit', () => resolve()));
  const said = async (type: FeederToParent['type']): Promise<FeederToParent> => {
    for (;;) {
      const m = got.find((x) => x.type === type);
      if (m) return m;
      if (child.exitCode !== null)
        throw new Error(`the feeder exited (${child.exitCode}) before saying ${type}`);
      await Promise.race([new Promise<void>((r) => waiters.push(r)), exited]);
    }
  };
  return { said, tell: (m) => child.send(m), exited };
}

/** Lines a second between the first and the last flood line. */
const rate = (n: number, t0: number, t1: number): number => (n - 1) / ((t1 - t0) / 1000);

async function bareReader(pty: PtyPair): Promise<number> {
  const port = new SerialPort({ path: pty.host, baudRate: 115200, autoOpen: false });
  await new Promise<void>((resolve, reject) => port.open((e) => (e ? reject(e) : resolve())));
  let n = 0;
  let t0 = 0;
  let t1 = 0;
  port.pipe(new ReadlineParser({ delimiter: '\n' })).on('data', () => {
    n++;
    if (n === 1) t0 = performance.now();
    if (n === FLOOD) t1 = performance.now();
  });
  const feeder = startFeeder(['--port', pty.rig, '--mode', 'blind', '--flood', String(FLOOD)]);
  await feeder.said('ready');
  feeder.tell({ type: 'go' });
  await waitFor(() => n >= FLOOD, 120_000, 'the bare reader to read every line');
  feeder.tell({ type: 'finish' });
  await feeder.exited;
  await new Promise<void>((resolve) => port.close(() => resolve()));
  return rate(FLOOD, t0, t1);
}

interface PipelineRun {
  rate: number;
  /** Share of the flood the daemon's thread was busy rather than waiting for input. */
  eventLoopUtilization: number;
  viewerSamples: number;
  viewerMessages: number;
  exitCode: number;
  endReason: string;
  framesAccepted: number;
  framesRejected: number;
}

async function daemonRun(
  pty: PtyPair,
  work: string,
  calibrationPath: string,
): Promise<PipelineRun> {
  const { startRun } = await product<DaemonModule>('run/daemon.js');
  const runs = mkdtempSync(join(work, 'runs-'));
  // The live feed's tokens file goes to the scratch folder, not the user's configuration.
  process.env['CELLVIGIL_HOME'] = join(work, 'home');
  const handle = await startRun(
    {
      port: pty.host,
      speed: 1,
      runs,
      listen: '127.0.0.1:0',
      once: true,
      fresh: true,
      linkTimeoutS: 60,
      rotateBytes: 16 * 1024 * 1024,
      channel: 0,
      chemistry: 'li-ion',
      cells: 1,
      calibration: calibrationPath,
      label: 'bench-ingest',
    },
    { out: nullStream(), err: nullStream() },
  );
  let n = 0;
  let t0 = 0;
  let t1 = 0;
  let elu0 = performance.eventLoopUtilization();
  let elu = 0;
  handle.addObserver({
    sample: (row) => {
      if ((row.flags & 1) === 0) return;
      n++;
      if (n === 1) {
        t0 = performance.now();
        elu0 = performance.eventLoopUtilization();
      }
      if (n === FLOOD) {
        t1 = performance.now();
        elu = performance.eventLoopUtilization(elu0).utilization;
      }
    },
  });
  const feeder = startFeeder([
    '--port',
    pty.rig,
    '--mode',
    'rig',
    '--rest',
    String(REST),
    '--flood',
    String(FLOOD),
    '--viewer',
    `${handle.liveUrl!.replace(/^http/, 'ws')}live`,
  ]);
  await feeder.said('ready');
  feeder.tell({ type: 'go' });
  await waitFor(() => n >= FLOOD, 180_000, 'the daemon to take every flood frame');
  handle.stop('the benchmark');
  feeder.tell({ type: 'finish' });
  const outcome = await handle.done;
  const viewer = (await feeder.said('viewer')) as Extract<FeederToParent, { type: 'viewer' }>;
  await feeder.exited;
  await handle.closeLive();
  rmSync(runs, { recursive: true, force: true });
  return {
    rate: rate(FLOOD, t0, t1),
    eventLoopUtilization: elu,
    viewerSamples: viewer.samples,
    viewerMessages: viewer.messages,
    exitCode: outcome.exitCode,
    endReason: outcome.result.end_reason,
    framesAccepted: outcome.result.frames_accepted,
    framesRejected: outcome.result.frames_rejected,
  };
}

async function main(): Promise<void> {
  mkdirSync(BENCH_DIR, { recursive: true });
  const work = mkdtempSync(join(BENCH_DIR, 'ingest-'));
  const pty = await startPtyPair(work);
  try {
    const calibrationPath = join(work, 'bench-rig.cal.json');
    await benchCalibration(calibrationPath);
    const bare: number[] = [];
    const runs: PipelineRun[] = [];
    for (let r = 0; r < ROUNDS; r++) {
      bare.push(await bareReader(pty));
      runs.push(await daemonRun(pty, work, calibrationPath));
    }
    const best = runs.reduce((a, b) => (b.rate > a.rate ? b : a));
    const baseline = Math.max(...bare);
    const ratio = best.rate / baseline;
    const honest = runs.every(
      (r) =>
        r.endReason === 'stopped' && r.framesRejected === 0 && r.framesAccepted >= FLOOD + REST,
    );
    reportFigure({
      figure: 'ingest',
      title: 'Ingest over a pty: whole daemon vs bare serialport+readline',
      measured: best.rate,
      baseline,
      unit: 'lines/s',
      ratio,
      measuredText: `${fmt(best.rate / 1000, 1)} k lines/s`,
      baselineText: `${fmt(baseline / 1000, 1)} k lines/s`,
      target: 'ratio ≥ 0.50',
      pass: ratio >= 0.5 && honest,
      details: {
        flood_frames: FLOOD,
        rest_frames: REST,
        rounds: ROUNDS,
        bare_rates: bare.map(Math.round),
        daemon_rates: runs.map((r) => Math.round(r.rate)),
        daemon_runs: runs,
        note: honest
          ? 'every run passed the precheck, took every frame and ended as stopped'
          : 'a daemon run did not end as expected; see daemon_runs',
      },
    });
  } finally {
    await pty.close();
    rmSync(work, { recursive: true, force: true });
  }
}

main().catch((e: unknown) => {
  console.error(`bench-ingest: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
