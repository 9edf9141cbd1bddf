/**
 * Figure 4, stalled viewer: one viewer that never reads (its socket paused) while 100 000
 * samples flow through the hub and the live server, next to one viewer that reads. The extra
 * memory (heap and resident, after a full collection) against the same flow with no stalled
 * viewer must stay within 5 MB. Each case runs in a fresh process of its own.
 */
import { execFile } from 'node:child_process';
import type { Socket } from 'node:net';
import { fileURLToPath } from 'node:url';
import { promisify } from 'node:util';
import { WebSocket } from 'ws';
import {
  argValue,
  benchRunInfo,
  collect,
  memory,
  nextTick,
  product,
  reportFigure,
  signed,
  waitFor,
  type LiveHubModule,
  type LiveServerModule,
} from './bench-kit.js';

const SAMPLES = 100_000;
const WARMUP = 5_000;
const PER_TICK = 500;
const MAX_EXTRA_MB = 5;

interface CaseResult {
  stalled: boolean;
  heapGrowthMB: number;
  rssGrowthMB: number;
  heapAfterMB: number;
  rssAfterMB: number;
  seconds: number;
  readerSamples: number;
  /** The stalled viewer at the end: still connected, and what waited for it. */
  stalledViewer: {
    connected: boolean;
    queued: number;
    queuedBytes: number;
    bufferedAmount: number;
    coalesced: number;
  } | null;
}

function opened(ws: WebSocket): Promise<void> {
  return new Promise(
    (resolve, reject) => (ws.once('open', () => resolve()), ws.once('error', reject)),
  );
}

/** One case, in this process: the flow with or without a viewer that never reads. */
async function runCase(stalled: boolean): Promise<CaseResult> {
  const { LiveHub } = await product<LiveHubModule>('live/live-hub.js');
  const { startLiveServer } = await product<LiveServerModule>('live/live-server.js');
  const hub = new LiveHub();
  hub.setRun(benchRunInfo('bench-stalled'));
  const live = await startLiveServer({
    hub,
    listen: '127.0.0.1:0',
    tokenStore: { control: 'c'.repeat(64), viewer: null },
  });
  const url = `ws://127.0.0.1:${live.port}/live`;
  let readerSamples = 0;
  const reader = new WebSocket(url, { perMessageDeflate: false });
  reader.on('message', (d: Buffer) => {
    if (d.toString('latin1', 0, 16) === '{"type":"sample"') readerSamples++;
  });
  await opened(reader);
  let stuck: WebSocket | null = null;
  if (stalled) {
    stuck = new WebSocket(url, { perMessageDeflate: false });
    // Never reads once the hello is in: the kernel buffers fill, then the server's.
    const helloIn = new Promise<void>((resolve) => stuck!.once('message', () => resolve()));
    await opened(stuck);
    await helloIn;
    (stuck as unknown as { _socket: Socket })._socket.pause();
  }
  await waitFor(
    () => live.viewers().length === (stalled ? 2 : 1),
    5000,
    'the viewers to be attached',
  );

  let k = 0;
  const flow = async (n: number): Promise<void> => {
    for (let end = k + n; k < end;) {
      for (let j = 0; j < PER_TICK && k < end; j++, k++) {
        hub.sample({
          host_s: k * 0.05,
          voltage_V: 4.05 - k * 1e-6,
          current_A: 1.0,
          temperature_C: 25,
          charge_Ah: k * 1.4e-5,
          energy_Wh: k * 5.5e-5,
          state: 'discharging',
          load_on: true,
        });
      }
      await nextTick();
    }
  };
  await flow(WARMUP);
  collect();
  const before = memory();
  const t0 = performance.now();
  await flow(SAMPLES);
  const seconds = (performance.now() - t0) / 1000;
  collect();
  const after = memory();
  const viewers = live.viewers();
  const stuckStats = stalled
    ? (viewers.find((v) => v.bufferedAmount > 0 || v.coalesced > 0) ?? null)
    : null;
  reader.terminate();
  stuck?.terminate();
  await live.close();
  return {
    stalled,
    heapGrowthMB: after.heapMB - before.heapMB,
    rssGrowthMB: after.rssMB - before.rssMB,
    heapAfterMB: after.heapMB,
    rssAfterMB: after.rssMB,
    seconds,
    readerSamples,
    stalledViewer: stalled
      ? {
          connected: viewers.length === 2,
          queued: stuckStats?.queued ?? 0,
          queuedBytes: stuckStats?.queuedBytes ?? 0,
          bufferedAmount: stuckStats?.bufferedAmount ?? 0,
          coalesced: stuckStats?.coalesced ?? 0,
        }
      : null,
  };
}

/** Runs one case in a fresh process, so neither case inherits the other's heap. */
async function inChild(stalled: boolean): Promise<CaseResult> {
  const { stdout } = await promisify(execFile)(
    process.execPath,
    ['--expose-gc', fileURLToPath(import.meta.url), '--case', stalled ? 'stalled' : 'baseline'],
    { maxBuffer: 1 << 20 },
  );
  return JSON.parse(stdout) as CaseResult;
}

async function main(): Promise<void> {
  const base = await inChild(false);
  const with1 = await inChild(true);
  const extraHeap = with1.heapGrowthMB - base.heapGrowthMB;
  const extraRss = with1.rssGrowthMB - base.rssGrowthMB;
  const extra = Math.max(extraHeap, extraRss);
  reportFigure({
    figure: 'stalled',
    title: `Stalled viewer: ${SAMPLES / 1000} k samples past a viewer that never reads`,
    measured: extra,
    baseline: base.rssAfterMB,
    unit: 'MB extra',
    ratio: with1.rssAfterMB / base.rssAfterMB,
    measuredText: `${signed(extraHeap)} MB heap, ${signed(extraRss)} MB RSS`,
    baselineText: `growth ${signed(base.heapGrowthMB)} MB heap, ${signed(base.rssGrowthMB)} MB RSS`,
    target: `extra ≤ ${MAX_EXTRA_MB} MB`,
    pass:
      extra <= MAX_EXTRA_MB && with1.stalledViewer?.connected === true && with1.readerSamples > 0,
    details: { samples: SAMPLES, warmup: WARMUP, baseline: base, stalled: with1 },
  });
}

const which = argValue('case');
(which ? runCase(which === 'stalled').then((r) => console.log(JSON.stringify(r))) : main()).catch(
  (e: unknown) => {
    console.error(`bench-stalled: ${(e as Error).stack ?? String(e)}`);
    process.exit(1);
  },
);
