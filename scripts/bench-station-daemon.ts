/**
 * One daemon of the station benchmark, in a process of its own (forked by bench-station): the
 * one-channel daemon (`startRun`) on one pty, or a station (`startStation` with the real channel
 * runner) of one rig per pty, each logging every row to its run folders, no live feed. It
 * answers the parent's questions about its own process: CPU time so far (user and system, all
 * threads), event-loop delay and the largest resident set since the last question that reset
 * them.
 *
 *   --mode one --port <pty> --runs <dir>
 *   --mode station --ports <pty,…> --channels <per rig> --runs <dir>
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { argValue, MB, nullStream, product, type DaemonModule } from './bench-kit.js';

type StationDaemonModule = typeof import('../src/station/station-daemon.js');
type ChannelRunModule = typeof import('../src/cli/station-runner.js');

export interface DaemonUsage {
  type: 'usage';
  userUs: number;
  systemUs: number;
  /** Event-loop delay and largest RSS since the last reset. */
  p99Ms: number;
  maxMs: number;
  rssMaxMB: number;
}
export type DaemonToParent = { type: 'ready' } | DaemonUsage;
export type ParentToDaemon = { type: 'usage'; reset: boolean } | { type: 'stop' };

async function startOne(port: string, runs: string): Promise<() => Promise<void>> {
  const { startRun } = await product<DaemonModule>('run/daemon.js');
  const run = await startRun(
    {
      port,
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
  return async () => {
    run.stop('the benchmark');
    await run.done;
  };
}

async function startStationOf(
  ports: string[],
  channels: number,
  runs: string,
): Promise<() => Promise<void>> {
  const { startStation } = await product<StationDaemonModule>('station/station-daemon.js');
  const { channelRunner } = await product<ChannelRunModule>('cli/station-runner.js');
  const file = join(runs, 'bench-station.yaml');
  const lines = Array.from({ length: channels }, (_, ch) => `      ${ch}: { chemistry: li-ion }`);
  writeFileSync(
    file,
    [
      `runs: ${join(runs, 'runs-station')}`,
      'listen: off',
      'rigs:',
      ...ports.flatMap((p, i) => [`  r${i}:`, `    port: ${p}`, '    channels:', ...lines]),
      '',
    ].join('\n'),
  );
  const handle = await startStation(
    { file, runs, listen: null, speed: 1, once: false, fresh: true, linkTimeoutS: 60 },
    { print: () => undefined },
    channelRunner({ print: () => undefined }),
  );
  return async () => {
    await handle.stop('the benchmark');
  };
}

async function main(): Promise<void> {
  const runs = argValue('runs') ?? '.';
  const stop =
    argValue('mode') === 'station'
      ? await startStationOf(
          (argValue('ports') ?? '').split(',').filter(Boolean),
          Number(argValue('channels') ?? 8),
          runs,
        )
      : await startOne(argValue('port') ?? '', runs);

  const delay = monitorEventLoopDelay({ resolution: 10 });
  delay.enable();
  let rssMax = 0;
  const rssTimer = setInterval(() => {
    rssMax = Math.max(rssMax, process.memoryUsage.rss());
  }, 250);
  const send = (m: DaemonToParent): void => void process.send!(m);
  process.on('message', (m: ParentToDaemon) => {
    if (m.type === 'usage') {
      const cpu = process.cpuUsage();
      rssMax = Math.max(rssMax, process.memoryUsage.rss());
      send({
        type: 'usage',
        userUs: cpu.user,
        systemUs: cpu.system,
        p99Ms: delay.percentile(99) / 1e6,
        maxMs: delay.max / 1e6,
        rssMaxMB: rssMax / MB,
      });
      if (m.reset) {
        delay.reset();
        rssMax = 0;
      }
      return;
    }
    clearInterval(rssTimer);
    delay.disable();
    void stop().then(() => process.disconnect());
  });
  send({ type: 'ready' });
}

main().catch((e: unknown) => {
  console.error(`bench-station-daemon: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
