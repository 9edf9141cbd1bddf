/**
 * Fleet figure: 40 simulated stations × 8 channels, each channel making 2 samples a second
 * (640 a second in all), published through one Mosquitto to one fleet view; end-to-end latency
 * from the sample's making (its live hub's broadcast at the station) to the fleet page's
 * WebSocket message carrying it, p99. Baseline, in the same run and through the same broker:
 * bare `mqtt` clients publishing the same payloads on the same schedule and one bare `mqtt`
 * subscriber receiving and parsing them. Target: p99 at most 1.5 × the baseline's p99.
 *
 * Three processes, as on a lab's machines: this one holds the stations (or the bare
 * publishers), a child the fleet view, another child the page's socket (or the bare
 * subscriber). All read the machine's monotonic clock (process.hrtime), injected as the
 * stations' wall clock, so a sample's made_ms and its receipt are on one time line.
 *
 * The setups are all up at once and take the schedule in turn, a second each (SLICE_MS), the
 * baseline's and the relay's topics under roots of their own so no reader sees another's
 * messages. On a shared machine the p99 is where other work lands: with rounds of 10 s a side,
 * a busy spell fell on one setup only, and one round's ratio swung from 0.7 to 4.0 within a
 * run; sliced this finely, the load falls on every setup alike.
 *
 * The broker runs with `set_tcp_nodelay true`, as docs/fleet.md sets up a lab's broker, for
 * every setup alike. With Mosquitto's default a message to a subscriber waits for the
 * acknowledgement of the one before; the fleet view, which does more with each message than
 * the bare subscriber, acknowledges later, and its hop from the station took 1.3 ms at the
 * median instead of 0.74 ms (p99 28 ms instead of 9–17 ms) on this machine under load.
 *
 * Both setups are stamped at the same points: `made_ms` when the sample's payload is made, one
 * channel after the other in the station's turn (the bare publisher right before it serialises
 * and publishes, the station's link when the hub hands it the sample), and the receipt when the
 * reader has parsed the message. The kit's percentile takes a percent, not a fraction:
 * `percentile(…, 0.99)` would be the 0.99th percentile, about the fastest 1 %, not the p99.
 */
import { fork, spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import mqtt from 'mqtt';
import { WebSocket, WebSocketServer } from 'ws';
import {
  argValue,
  BENCH_DIR,
  benchRunInfo,
  fmt,
  percentile,
  product,
  reportFigure,
  sleep,
  type LiveHubModule,
} from './bench-kit.js';

type FleetLinkModule = typeof import('../src/fleet/fleet-link.js');
type FleetViewModule = typeof import('../src/fleet/fleet-view.js');
type BrokerOptionsModule = typeof import('../src/fleet/broker-options.js');
type TopicsModule = typeof import('../src/fleet/topics.js');

const STATIONS = 40;
const CHANNELS = 8;
const RATE_HZ = 2;
const SECONDS = Number(argValue('seconds') ?? 10);
/** Measured seconds per setup: seconds × rounds (the rounds are kept as a multiplier). */
const ROUNDS = Number(argValue('rounds') ?? 2);
/** How long each setup has the schedule before the next takes it. */
const SLICE_MS = 1000;
const WARMUP_S = 2;
const TARGET_RATIO = 1.5;

/** Milliseconds on the monotonic clock every process on the machine shares. */
const monoMs = (): number => Number(process.hrtime.bigint()) / 1e6;

async function freePort(): Promise<number> {
  return new Promise((resolve) => {
    const s = createServer();
    s.listen(0, '127.0.0.1', () => {
      const a = s.address();
      s.close(() => resolve(typeof a === 'object' && a ? a.port : 0));
    });
  });
}

async function startMosquitto(dir: string): Promise<{ url: string; child: ChildProcess }> {
  const port = await freePort();
  const conf = join(dir, 'mosquitto.conf');
  const root = process.getuid?.() === 0 ? ['user root'] : [];
  writeFileSync(
    conf,
    [
      `listener ${port} 127.0.0.1`,
      'allow_anonymous true',
      'persistence false',
      // As docs/fleet.md configures a lab's broker; for every setup alike.
      'set_tcp_nodelay true',
      ...root,
      '',
    ].join('\n'),
  );
  const bin = existsSync('/usr/sbin/mosquitto') ? '/usr/sbin/mosquitto' : 'mosquitto';
  const child = spawn(bin, ['-c', conf], { stdio: 'ignore' });
  const url = `mqtt://127.0.0.1:${port}`;
  for (let i = 0; i < 100; i++) {
    const c = mqtt.connect(url, { reconnectPeriod: 0, connectTimeout: 500 });
    const ok = await new Promise<boolean>((r) => {
      c.once('connect', () => r(true));
      c.once('error', () => r(false));
      c.once('close', () => r(false));
    });
    c.end(true);
    if (ok) return { url, child };
    await sleep(50);
  }
  throw new Error('mosquitto did not start (is it installed? bash scripts/install-test-tools.sh)');
}

/** The child: a fleet view on the broker, telling the parent its page's address. */
async function viewChild(url: string): Promise<void> {
  const { startFleetView } = await product<FleetViewModule>('fleet/fleet-view.js');
  const { resolveBroker } = await product<BrokerOptionsModule>('fleet/broker-options.js');
  const view = await startFleetView({
    broker: resolveBroker({ url }, 'bench-fleet-view'),
    listen: '127.0.0.1:0',
    tokenStore: { control: 'c'.repeat(64), viewer: null },
  });
  while (!view.connected) await sleep(20);
  process.send!({ url: view.url });
  process.on('disconnect', () => void view.close().then(() => process.exit(0)));
}

/** One sample per channel every 500 ms, the stations spread over the interval. */
function schedule(each: (station: number) => void): () => void {
  const timers: NodeJS.Timeout[] = [];
  for (let s = 0; s < STATIONS; s++) {
    const start = setTimeout(
      () => {
        each(s);
        timers.push(setInterval(() => each(s), 1000 / RATE_HZ));
      },
      (s * 1000) / RATE_HZ / STATIONS,
    );
    timers.push(start);
  }
  return () => timers.forEach((t) => clearInterval(t));
}

interface Round {
  latencies: number[];
  received: number;
  sent: number;
}

function sampleOf(host_s: number) {
  return {
    host_s,
    voltage_V: 3.9 - host_s * 1e-4,
    current_A: 1.0,
    temperature_C: 25,
    charge_Ah: host_s / 3600,
    energy_Wh: (host_s / 3600) * 3.7,
    state: 'discharging',
    load_on: true,
  };
}

/**
 * The page's side, in a process of its own as a browser on another machine would be: reads
 * tiles from the fleet view's /fleet socket (`ws`), samples from the broker (`mqtt`) or the
 * relay's socket (`relay`), and notes each new sample's delay while told to measure.
 */
async function readerChild(mode: string, url: string, root: string): Promise<void> {
  const latencies: number[] = [];
  let measuring = false;
  let received = 0;
  // A tile also goes out when a channel's retained status refreshes it; only a message
  // carrying a sample not seen yet counts.
  const lastMade = new Map<string, number>();
  const take = (data: Buffer | string): void => {
    const m = JSON.parse(data.toString()) as {
      type?: string;
      key?: string;
      station?: string;
      channel?: number;
      made_ms?: number | null;
    };
    if (!measuring || typeof m.made_ms !== 'number') return;
    if (m.type !== undefined && m.type !== 'tile') return;
    const key = m.key ?? `${m.station}/${m.channel}`;
    if (lastMade.get(key) === m.made_ms) return;
    lastMade.set(key, m.made_ms);
    received++;
    latencies.push(monoMs() - m.made_ms);
  };
  if (mode === 'mqtt') {
    const sub = mqtt.connect(url, { clientId: 'bare-sub', protocolVersion: 5, reconnectPeriod: 0 });
    await new Promise((r) => sub.once('connect', r));
    await sub.subscribeAsync(`${root}/station/+/ch/+/sample`, { qos: 0 });
    sub.on('message', (_topic, payload) => take(payload));
  } else {
    const ws = new WebSocket(url, { perMessageDeflate: false });
    ws.on('message', (d) => take(d as Buffer));
    await new Promise((r) => ws.once('open', r));
  }
  process.on('message', (cmd) => {
    if (cmd === 'start') measuring = true;
    else {
      measuring = false;
      process.send!({ latencies, received }, () => process.exit(0));
    }
  });
  process.send!('ready');
}

interface Reader {
  start(): void;
  finish(): Promise<{ latencies: number[]; received: number }>;
}

async function startReader(mode: 'ws' | 'mqtt' | 'relay', url: string, root = ''): Promise<Reader> {
  const child = fork(fileURLToPath(import.meta.url), ['--reader-child', mode, url, root], {
    stdio: 'inherit',
  });
  await new Promise((r) => child.once('message', r));
  return {
    start: () => child.send('start'),
    finish: () =>
      new Promise((resolve) => {
        child.once('message', (m) => resolve(m as { latencies: number[]; received: number }));
        child.send('stop');
      }),
  };
}

/** One setup as the schedule drives it: a station's turn, and the reader of its messages. */
interface Setup {
  /** Makes station s's samples of this turn; returns how many. */
  turn(s: number): number;
  reader: Reader;
  close(): Promise<void>;
}

/** The product: stations with their links here, the fleet view and the page each in a child. */
async function productSetup(url: string): Promise<Setup> {
  const { LiveHub } = await product<LiveHubModule>('live/live-hub.js');
  const { startFleetLink } = await product<FleetLinkModule>('fleet/fleet-link.js');
  const { resolveBroker } = await product<BrokerOptionsModule>('fleet/broker-options.js');
  const child = fork(fileURLToPath(import.meta.url), ['--view-child', url], { stdio: 'inherit' });
  const pageUrl = await new Promise<string>((r) =>
    child.once('message', (m) => r((m as { url: string }).url)),
  );
  const hubs = Array.from({ length: STATIONS }, (_, s) =>
    Array.from({ length: CHANNELS }, (_, c) => {
      const hub = new LiveHub();
      hub.setRun(benchRunInfo(`s${s}-c${c}`));
      return hub;
    }),
  );
  // A ceiling above the channels' own rate: what is measured is the path, not the throttle.
  const links = hubs.map((chs, s) =>
    startFleetLink({
      broker: resolveBroker({ url }, `bench-station-${s}`),
      station: `station-${s}`,
      channels: chs.map((hub, channel) => ({ channel, hub })),
      controlToken: null,
      sampleHz: 4,
      clock: hostClockWithWall(),
    }),
  );
  while (!links.every((l) => l.stats().connected)) await sleep(50);
  const reader = await startReader('ws', `${pageUrl.replace('http', 'ws')}fleet`);
  let t = 0;
  return {
    turn: (s) => {
      t += 1;
      for (const hub of hubs[s]!) hub.sample(sampleOf(t));
      return CHANNELS;
    },
    reader,
    close: async () => {
      await Promise.all(links.map((l) => l.close(500)));
      child.disconnect();
      await new Promise((r) => child.once('exit', r));
    },
  };
}

/** The host clock with the machine's monotonic milliseconds as its wall time. */
function hostClockWithWall() {
  const timers = new Map<number, NodeJS.Timeout>();
  let next = 1;
  return {
    now: () => performance.now(),
    wallNow: monoMs,
    setTimer(fn: () => void, ms: number, repeat = false) {
      const id = next++;
      timers.set(
        id,
        repeat ? setInterval(fn, ms) : setTimeout(() => (timers.delete(id), fn()), ms),
      );
      return { id };
    },
    clearTimer(h: { id: number }) {
      clearTimeout(timers.get(h.id));
      timers.delete(h.id);
    },
  };
}

/**
 * The reference of the extra hop a fleet view is: a bare subscriber in the child that passes
 * each payload unchanged to a bare WebSocket server's client here. Not the target's baseline;
 * it shows how much of the product's latency is the second hop itself.
 */
async function relayChild(url: string, root: string): Promise<void> {
  const wss = new WebSocketServer({ host: '127.0.0.1', port: 0, perMessageDeflate: false });
  await new Promise((r) => wss.once('listening', r));
  const sub = mqtt.connect(url, { clientId: 'bare-relay', protocolVersion: 5, reconnectPeriod: 0 });
  await new Promise((r) => sub.once('connect', r));
  await sub.subscribeAsync(`${root}/station/+/ch/+/sample`, { qos: 0 });
  sub.on('message', (_t, payload) =>
    wss.clients.forEach((c) => c.send(payload, { binary: false })),
  );
  const a = wss.address();
  process.send!({ url: `ws://127.0.0.1:${typeof a === 'object' && a ? a.port : 0}/` });
  process.on('disconnect', () => process.exit(0));
}

/**
 * The baseline: bare clients publishing the same payloads, one bare subscriber parsing them.
 * Its topics are the fleet's under a root of its own, so the fleet view never sees them.
 */
async function bareSetup(url: string, root: string, relayed = false): Promise<Setup> {
  const { channelTopic, TOPIC_ROOT } = await product<TopicsModule>('fleet/topics.js');
  const topics = Array.from({ length: STATIONS }, (_, s) =>
    Array.from({ length: CHANNELS }, (_, c) =>
      channelTopic(`station-${s}`, c, 'sample').replace(TOPIC_ROOT, root),
    ),
  );
  const tag = relayed ? 'relay' : 'bare';
  const connected = (c: mqtt.MqttClient) => new Promise((r) => c.once('connect', r));
  const pubs = Array.from({ length: STATIONS }, (_, s) =>
    mqtt.connect(url, { clientId: `${tag}-${s}`, protocolVersion: 5, reconnectPeriod: 0 }),
  );
  await Promise.all(pubs.map(connected));
  let child: ChildProcess | null = null;
  let readUrl = url;
  if (relayed) {
    child = fork(fileURLToPath(import.meta.url), ['--relay-child', url, root], {
      stdio: 'inherit',
    });
    readUrl = await new Promise<string>((r) =>
      child!.once('message', (m) => r((m as { url: string }).url)),
    );
  }
  const reader = await startReader(relayed ? 'relay' : 'mqtt', readUrl, root);
  let t = 0;
  return {
    turn: (s) => {
      t += 1;
      for (let c = 0; c < CHANNELS; c++) {
        const payload = {
          v: 1,
          station: `station-${s}`,
          channel: c,
          made_ms: monoMs(),
          ...sampleOf(t),
          time_to_cutoff_s: null,
        };
        pubs[s]!.publish(topics[s]![c]!, JSON.stringify(payload), { qos: 0 });
      }
      return CHANNELS;
    },
    reader,
    close: async () => {
      await Promise.all(pubs.map((c) => c.endAsync()));
      if (child) {
        child.disconnect();
        await new Promise((r) => child!.once('exit', r));
      }
    },
  };
}

/**
 * Runs the setups in turn, SLICE_MS each, on one schedule: every station turn goes to the
 * setup whose slice it is. Load from the rest of the machine then falls on all of them alike,
 * where rounds of several seconds each let a busy minute land on one side only. Returns each
 * setup's receipts and the samples it made while measured.
 */
async function interleave(setups: Setup[]): Promise<Round[]> {
  let current = 0;
  let measuring = false;
  const sent = setups.map(() => 0);
  const stop = schedule((s) => {
    const i = current;
    const n = setups[i]!.turn(s);
    if (measuring) sent[i]! += n;
  });
  const rotate = setInterval(() => (current = (current + 1) % setups.length), SLICE_MS);
  await sleep(WARMUP_S * 1000 * setups.length);
  measuring = true;
  setups.forEach((x) => x.reader.start());
  await sleep(SECONDS * ROUNDS * 1000 * setups.length);
  measuring = false;
  stop();
  clearInterval(rotate);
  await sleep(500);
  const got = await Promise.all(setups.map((x) => x.reader.finish()));
  return got.map((g, i) => ({ ...g, sent: sent[i]! }));
}

function summary(rounds: Round[]) {
  const all = rounds.flatMap((r) => r.latencies).sort((a, b) => a - b);
  const sent = rounds.reduce((n, r) => n + r.sent, 0);
  const received = rounds.reduce((n, r) => n + r.received, 0);
  return {
    p50: percentile(all, 50),
    p90: percentile(all, 90),
    p99: percentile(all, 99),
    p999: percentile(all, 99.9),
    max: all[all.length - 1] ?? NaN,
    sent,
    received,
  };
}

async function main(): Promise<void> {
  const dir = mkdtempSync(join(BENCH_DIR, 'fleet-'));
  const broker = await startMosquitto(dir);
  try {
    // The baseline's and the relay's clients are up before the stations, as they were made.
    const baselineSide = await bareSetup(broker.url, 'bench-bare/v1');
    const relaySide = await bareSetup(broker.url, 'bench-relay/v1', true);
    const productSide = await productSetup(broker.url);
    const [baseline, measured, relayed] = await interleave([baselineSide, productSide, relaySide]);
    await Promise.all([baselineSide, productSide, relaySide].map((x) => x.close()));
    const m = summary([measured!]);
    const b = summary([baseline!]);
    const r = summary([relayed!]);
    const ratio = m.p99 / b.p99;
    reportFigure({
      figure: 'fleet',
      title: `fleet: ${STATIONS} stations × ${CHANNELS} channels at ${RATE_HZ}/s, sample → fleet page p99`,
      measured: m.p99,
      baseline: b.p99,
      unit: 'ms',
      ratio,
      measuredText: `${fmt(m.p99, 2)} ms`,
      baselineText: `${fmt(b.p99, 2)} ms`,
      target: `≤ ${TARGET_RATIO} × baseline p99`,
      pass: ratio <= TARGET_RATIO,
      details: {
        measured: m,
        baseline: b,
        bare_relay_reference: r,
        measured_seconds_each: SECONDS * ROUNDS,
        slice_ms: SLICE_MS,
      },
    });
  } finally {
    broker.child.kill('SIGKILL');
    rmSync(dir, { recursive: true, force: true });
  }
}

const i = process.argv.indexOf('--view-child');
const j = process.argv.indexOf('--relay-child');
const k = process.argv.indexOf('--reader-child');
if (i >= 0) void viewChild(process.argv[i + 1]!);
else if (j >= 0) void relayChild(process.argv[j + 1]!, process.argv[j + 2]!);
else if (k >= 0) void readerChild(process.argv[k + 1]!, process.argv[k + 2]!, process.argv[k + 3]!);
else
  main().catch((e: unknown) => {
    console.error((e as Error).stack ?? String(e));
    process.exit(1);
  });
