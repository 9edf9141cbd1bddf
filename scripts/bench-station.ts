/**
 * Figure 6, station: 8 rigs × 8 channels at 20 frames/s per channel (1 280 frames/s) over
 * pseudo-terminals, every row logged, against the one-channel daemon at the same total frame
 * rate, measured side by side: each daemon runs in a process of its own
 * (scripts/bench-station-daemon.ts), fed by a process of rigs of its own
 * (scripts/bench-station-feeder.ts), both at once. The machine's moments of contention then
 * fall on both alike; the ratio of CPU time per frame is taken over several consecutive windows
 * and its median reported. For the station: its event-loop delay p99 over all the windows and
 * its largest resident set. Targets: CPU per frame ≤ 1.2 × the one-channel daemon's,
 * p99 ≤ 20 ms, RSS ≤ 200 MB.
 */
import { fork, type ChildProcess } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { DaemonToParent, DaemonUsage, ParentToDaemon } from './bench-station-daemon.js';
import type { ParentToStationFeeder, StationFeederToParent } from './bench-station-feeder.js';
import {
  argValue,
  BENCH_DIR,
  fmt,
  reportFigure,
  sleep,
  startPtyPair,
  type PtyPair,
} from './bench-kit.js';

const RIGS = Number(argValue('rigs') ?? 8);
const CHANNELS = Number(argValue('channels') ?? 8);
const RATE = Number(argValue('rate') ?? 20);
const ROUNDS = Number(argValue('rounds') ?? 5);
const ROUND_S = Number(argValue('seconds') ?? 5);
const WARMUP_S = 10;
const FEEDER = fileURLToPath(new URL('./bench-station-feeder.js', import.meta.url));
const DAEMON = fileURLToPath(new URL('./bench-station-daemon.js', import.meta.url));
const MAX_CPU_RATIO = 1.2;
const MAX_P99_MS = 20;
const MAX_RSS_MB = 200;

/** A child that answers one request at a time, in order. */
interface Asker<Q, A> {
  ask(q: Q): Promise<A>;
  exited: Promise<void>;
}

function forkAsker<Q, A>(
  script: string,
  args: string[],
): { child: ChildProcess; ready: Promise<void>; asker: Asker<Q, A> } {
  const child = fork(script, args, { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
  const waiting: Array<(m: A) => void> = [];
  let readyNow: () => void = () => undefined;
  const ready = new Promise<void>((r) => (readyNow = r));
  let first = true;
  child.on('message', (m: A) => {
    if (first) {
      first = false;
      return readyNow();
    }
    waiting.shift()?.(m);
  });
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  const asker: Asker<Q, A> = {
    ask: (q) => {
      const reply = new Promise<A>((r) => waiting.push(r));
      child.send(q as object);
      return reply;
    },
    exited,
  };
  void exited.then(() => {
    if (first) readyNow();
  });
  return { child, ready, asker };
}

type Counts = Extract<StationFeederToParent, { type: 'counts' }>;

interface Side {
  feeder: Asker<ParentToStationFeeder, StationFeederToParent>;
  daemon: Asker<ParentToDaemon, DaemonToParent>;
  loads: number;
}

async function startSide(
  rigPorts: string[],
  hostPorts: string[],
  channels: number,
  rate: number,
  daemonArgs: string[],
): Promise<Side> {
  const f = forkAsker<ParentToStationFeeder, StationFeederToParent>(FEEDER, [
    '--ports',
    rigPorts.join(','),
    '--channels',
    String(channels),
    '--rate',
    String(rate),
  ]);
  await f.ready;
  const d = forkAsker<ParentToDaemon, DaemonToParent>(DAEMON, daemonArgs);
  await Promise.race([d.ready, d.asker.exited]);
  if (d.child.exitCode !== null) throw new Error(`the daemon (${daemonArgs.join(' ')}) exited`);
  return { feeder: f.asker, daemon: d.asker, loads: hostPorts.length * channels };
}

const counts = async (s: Side): Promise<Counts> =>
  (await s.feeder.ask({ type: 'count' })) as Counts;
const usage = async (s: Side, reset: boolean): Promise<DaemonUsage> =>
  (await s.daemon.ask({ type: 'usage', reset })) as DaemonUsage;

async function allLoadsOn(sides: Side[]): Promise<void> {
  const until = Date.now() + 90_000;
  for (;;) {
    const c = await Promise.all(sides.map(counts));
    if (c.every((x, i) => x.loadsOn >= sides[i]!.loads)) return;
    if (Date.now() > until) throw new Error('only some loads went on');
    await sleep(200);
  }
}

interface Mark {
  frames: number;
  cpuUs: number;
  systemUs: number;
  atMs: number;
  usage: DaemonUsage;
}

async function mark(s: Side, reset: boolean): Promise<Mark> {
  const [c, u] = await Promise.all([counts(s), usage(s, reset)]);
  return {
    frames: c.frames,
    cpuUs: u.userUs + u.systemUs,
    systemUs: u.systemUs,
    atMs: performance.now(),
    usage: u,
  };
}

interface Window {
  frames: number;
  cpuPerFrameUs: number;
  cpuShare: number;
  systemShare: number;
}

function windowOf(a: Mark, b: Mark): Window {
  const frames = b.frames - a.frames;
  const wallUs = (b.atMs - a.atMs) * 1000;
  return {
    frames,
    cpuPerFrameUs: (b.cpuUs - a.cpuUs) / frames,
    cpuShare: (b.cpuUs - a.cpuUs) / wallUs,
    systemShare: (b.systemUs - a.systemUs) / wallUs,
  };
}

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
};

async function main(): Promise<void> {
  mkdirSync(BENCH_DIR, { recursive: true });
  const work = mkdtempSync(join(BENCH_DIR, 'station-'));
  process.env['CELLVIGIL_HOME'] = join(work, 'home');
  const ptys: PtyPair[] = [];
  const sides: Side[] = [];
  try {
    for (let i = 0; i <= RIGS; i++) {
      const dir = join(work, `pty-${i}`);
      mkdirSync(dir);
      ptys.push(await startPtyPair(dir));
    }
    const [onePty, ...stationPtys] = ptys as [PtyPair, ...PtyPair[]];
    const oneRuns = mkdtempSync(join(work, 'runs-one-'));
    const stationRuns = mkdtempSync(join(work, 'runs-station-'));
    const one = await startSide([onePty.rig], [onePty.host], 1, RATE * RIGS * CHANNELS, [
      '--mode',
      'one',
      '--port',
      onePty.host,
      '--runs',
      oneRuns,
    ]);
    sides.push(one);
    const station = await startSide(
      stationPtys.map((p) => p.rig),
      stationPtys.map((p) => p.host),
      CHANNELS,
      RATE,
      [
        '--mode',
        'station',
        '--ports',
        stationPtys.map((p) => p.host).join(','),
        '--channels',
        String(CHANNELS),
        '--runs',
        stationRuns,
      ],
    );
    sides.push(station);
    await allLoadsOn(sides);
    await sleep(WARMUP_S * 1000);

    let prev = await Promise.all(sides.map((s) => mark(s, true)));
    const rounds: Array<{ one: Window; station: Window; ratio: number }> = [];
    for (let r = 0; r < ROUNDS; r++) {
      await sleep(ROUND_S * 1000);
      const now = await Promise.all(sides.map((s) => mark(s, false)));
      const w1 = windowOf(prev[0]!, now[0]!);
      const ws = windowOf(prev[1]!, now[1]!);
      rounds.push({ one: w1, station: ws, ratio: ws.cpuPerFrameUs / w1.cpuPerFrameUs });
      prev = now;
    }
    const [oneEnd, stationEnd] = prev as [Mark, Mark];
    const ratio = median(rounds.map((r) => r.ratio));
    const stationUs = median(rounds.map((r) => r.station.cpuPerFrameUs));
    const oneUs = median(rounds.map((r) => r.one.cpuPerFrameUs));
    const stationShare = median(rounds.map((r) => r.station.cpuShare));
    const oneShare = median(rounds.map((r) => r.one.cpuShare));
    const p99 = stationEnd.usage.p99Ms;
    const rss = stationEnd.usage.rssMaxMB;
    const pass = ratio <= MAX_CPU_RATIO && p99 <= MAX_P99_MS && rss <= MAX_RSS_MB;
    reportFigure({
      figure: 'station',
      title: `Station: ${RIGS} rigs × ${CHANNELS} channels at ${RATE} frames/s each over ptys vs one channel at the same total rate, side by side`,
      measured: stationUs,
      baseline: oneUs,
      unit: 'µs CPU/frame',
      ratio,
      measuredText: `${fmt(stationUs, 1)} µs/frame, ${fmt(stationShare * 100, 1)} % CPU, p99 ${fmt(p99, 1)} ms, ${fmt(rss, 0)} MB`,
      baselineText: `${fmt(oneUs, 1)} µs/frame, ${fmt(oneShare * 100, 1)} % CPU, p99 ${fmt(oneEnd.usage.p99Ms, 1)} ms`,
      target: `ratio ≤ ${MAX_CPU_RATIO}, p99 ≤ ${MAX_P99_MS} ms, RSS ≤ ${MAX_RSS_MB} MB`,
      pass,
      details: {
        rounds: ROUNDS,
        round_s: ROUND_S,
        warmup_s: WARMUP_S,
        round_ratios: rounds.map((r) => Number(r.ratio.toFixed(3))),
        station: {
          p99Ms: p99,
          maxMs: stationEnd.usage.maxMs,
          rssMaxMB: rss,
          windows: rounds.map((r) => r.station),
        },
        one_channel: {
          p99Ms: oneEnd.usage.p99Ms,
          maxMs: oneEnd.usage.maxMs,
          rssMaxMB: oneEnd.usage.rssMaxMB,
          windows: rounds.map((r) => r.one),
        },
      },
    });
  } finally {
    // The daemons first (each ends its runs), then the rigs, then the ptys.
    await Promise.all(
      sides.map(async (s) => {
        void s.daemon.ask({ type: 'stop' });
        await s.daemon.exited;
      }),
    );
    await Promise.all(
      sides.map(async (s) => {
        void s.feeder.ask({ type: 'finish' });
        await s.feeder.exited;
      }),
    );
    await Promise.all(ptys.map((p) => p.close()));
    rmSync(work, { recursive: true, force: true });
  }
}

main().catch((e: unknown) => {
  console.error(`bench-station: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
