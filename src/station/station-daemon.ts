import { basename, extname } from 'node:path';
import type { RigProfile } from '../chain/rig-profile-types.js';
import { DEFAULT_RIG_PATH, loadRigProfile } from '../chain/rig-profile-file.js';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../chemistry/chemistry-file.js';
import { PacedClock } from '../core/host-clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { startLiveServer, type LiveServer } from '../live/live-server.js';
import { StationFeed } from '../live/station-feed.js';
import { loadTokens } from '../live/tokens.js';
import {
  buildMultiChannelRig,
  buildSimRig,
  DEFAULT_SCENARIOS_PATH,
  loadScenarios,
} from '../sim/scenarios.js';
import { SerialSource } from '../sources/serial-source.js';
import { SimSource } from '../sources/sim-source.js';
import type { Source } from '../sources/source.js';
import type { FleetLink, FleetRunOptions } from '../fleet/fleet-link.js';
import type { ChannelRunner } from './channel-runner.js';
import { defaultRegistryPath } from '../registry/registry-path.js';
import { filingRunner, fleetChannels, linkStationFeed } from './station-hooks.js';
import { checkStationPlan } from './station-check.js';
import { loadStationFile } from './station-file.js';
import type { RigPlan, StationPlan } from './station-types.js';
import { Station } from './station.js';

/** What the user asked `station` for, as the CLI parsed it. */
export interface StationRequest {
  file: string;
  /** Where run folders go when the station file does not say. */
  runs: string;
  /** host:port of the live feed, null for none; the station file's when undefined. */
  listen: string | null | undefined;
  /** Virtual-clock speed of simulated rigs; 1 is real time. */
  speed: number;
  /** Exit when every channel's run has ended. */
  once: boolean;
  /** Start every channel afresh instead of resuming unfinished runs. */
  fresh: boolean;
  linkTimeoutS: number;
  chemistriesFile?: string;
  /**
   * The cell registry each finished run with a cell id is filed in: a file, or null for the
   * default beside the station's runs folder; absent: not filed.
   */
  registry?: string | null;
  /** What `--broker …` resolved: every channel is published there. Needs the live feed. */
  fleet?: FleetRunOptions;
}

export interface StationIo {
  print(line: string): void;
  /** Handle SIGINT/SIGTERM (the CLI does; in-process tests and benchmarks do not). */
  signals?: boolean;
}

export interface StationHandle {
  station: Station;
  /** The overview page's address, or null without a live feed. */
  liveUrl: string | null;
  /** Resolves with the station's exit code once it has stopped (see `stop`, and `once`). */
  done: Promise<number>;
  /** Stops every channel, waits for their results, closes the rigs and the feed. */
  stop(by: string): Promise<number>;
}

const DEFAULT_LISTEN = '127.0.0.1:8507';

/**
 * A station's exit code from its channels' ends: a safety limit anywhere (3) before a failure
 * (1) before a refusal (2); 0 when every channel ended normally.
 */
export function stationExitCode(codes: readonly number[]): number {
  for (const c of [3, 1, 2]) if (codes.includes(c)) return c;
  return 0;
}

/** Reads the station file and checks it against the chemistries, simulated rigs and --speed. */
async function readPlan(req: StationRequest): Promise<StationPlan> {
  const plan = await loadStationFile(req.file);
  checkStationPlan(
    plan,
    loadChemistries(req.chemistriesFile ?? DEFAULT_CHEMISTRIES_PATH),
    loadScenarios(DEFAULT_SCENARIOS_PATH),
  );
  if (!(req.speed > 0) || !Number.isFinite(req.speed))
    throw makeError(
      ErrorCodes.USAGE,
      `speed ${req.speed} is not a positive number`,
      '--speed',
      'Give a factor such as 1 (real time) or 200.',
    );
  if (req.speed !== 1 && plan.rigs.some((r) => r.link.kind === 'port'))
    throw makeError(
      ErrorCodes.USAGE,
      'a station with real rigs runs in real time',
      '--speed',
      'Leave --speed out; it applies to stations of simulated rigs only.',
    );
  return plan;
}

/**
 * Each rig's source: its serial port, or its simulated rig on the station's clock (simulated
 * rigs share one virtual clock, paced at --speed: one station time for all).
 */
async function rigSources(
  plan: StationPlan,
  paced: PacedClock | null,
): Promise<(r: RigPlan) => Source> {
  const profiles = new Map<string, RigProfile>();
  for (const r of plan.rigs)
    profiles.set(r.name, await loadRigProfile(r.profile ?? DEFAULT_RIG_PATH));
  const scenarios = paced ? loadScenarios(DEFAULT_SCENARIOS_PATH) : null;
  return (r) => {
    const profile = profiles.get(r.name)!;
    if (r.link.kind === 'port')
      return new SerialSource({ path: r.link.path, baudRate: r.baud ?? profile.frame.baud });
    const multi = scenarios!.rigs.get(r.link.name);
    const rig = multi
      ? buildMultiChannelRig(multi, paced!, profile)
      : buildSimRig(scenarios!.byName.get(r.link.name)!, paced!, profile);
    return new SimSource({ rig, clock: paced!, description: `simulated rig ${r.link.name}` });
  };
}

/** Reads and checks the station file, opens its rigs and starts every channel. */
export async function startStation(
  req: StationRequest,
  io: StationIo,
  runner: ChannelRunner,
): Promise<StationHandle> {
  const plan = await readPlan(req);
  const paced = plan.rigs.some((r) => r.link.kind === 'sim') ? new PacedClock(0, Date.now()) : null;
  // The command line's choice, else the file's (`off` is null), else the default address.
  const fromFile = plan.listen === undefined ? DEFAULT_LISTEN : plan.listen;
  const listen = req.listen !== undefined ? req.listen : fromFile;
  const feed = listen !== null ? new StationFeed() : null;
  const numbers = req.fleet ? fleetChannels(plan) : null;
  if (req.fleet && !feed) throw noFeedForBroker(plan.file);
  const station = new Station({
    plan,
    name: basename(plan.file, extname(plan.file)),
    runs: plan.runs ?? req.runs,
    runner:
      req.registry !== undefined
        ? filingRunner(runner, req.registry ?? defaultRegistryPath(plan.runs ?? req.runs), io.print)
        : runner,
    makeSource: await rigSources(plan, paced),
    clock: paced,
    feed,
    linkTimeoutS: req.linkTimeoutS,
    fresh: req.fresh,
    print: io.print,
  });
  const server = feed && listen !== null ? await startFeed(feed, listen, io) : null;
  const fleet =
    req.fleet && feed && numbers ? linkStationFeed(req.fleet, feed, numbers, io.print) : null;
  try {
    await station.start();
  } catch (e) {
    await fleet?.close();
    await server?.close();
    await station.close();
    throw makeError(
      ErrorCodes.PORT_OPEN,
      (e as Error).message,
      plan.file,
      "Check the rigs' ports (ls /dev/ttyUSB* /dev/ttyACM*) and that no other program holds them.",
    );
  }
  paced?.start(req.speed);
  return ending(station, { paced, server, fleet, req, io });
}

/** Stopping: every channel finished, the rigs and the feed closed, on a signal or with --once. */
function ending(
  station: Station,
  o: {
    paced: PacedClock | null;
    server: LiveServer | null;
    fleet: FleetLink | null;
    req: StationRequest;
    io: StationIo;
  },
): StationHandle {
  let finished!: (code: number) => void;
  const done = new Promise<number>((resolve) => (finished = resolve));
  let stopped: Promise<number> | null = null;
  const stop = (by: string): Promise<number> =>
    (stopped ??= (async () => {
      await station.stopAll(by);
      o.paced?.stop();
      await station.close();
      // A moment for viewers to receive the last results before the feed goes away.
      if (o.server) await new Promise((r) => setTimeout(r, 300));
      await o.fleet?.close();
      await o.server?.close();
      process.off('SIGINT', onSignal);
      process.off('SIGTERM', onSignal);
      const codes = [...station.outcomes().values()].flatMap((x) => (x ? [x.exitCode] : []));
      const code = stationExitCode(codes);
      finished(code);
      return code;
    })());
  let signals = 0;
  function onSignal(sig: NodeJS.Signals): void {
    signals++;
    o.io.print(
      signals > 1
        ? `${sig} again: every load is being switched off first; the station ends when the rigs confirm it.`
        : `${sig}: switching every channel's load off and finishing the runs…`,
    );
    void stop(sig);
  }
  if (o.io.signals) {
    process.on('SIGINT', onSignal);
    process.on('SIGTERM', onSignal);
  }
  if (o.req.once) void station.whenIdle().then(() => stop('every channel has ended (--once)'));
  return { station, liveUrl: o.server?.url ?? null, done, stop };
}

function noFeedForBroker(file: string): Error {
  return makeError(
    ErrorCodes.USAGE,
    'the broker is given what the live feed shows, and the live feed is off',
    file,
    'Drop --no-live (or `listen: off` in the station file) to publish to the broker.',
  );
}

async function startFeed(feed: StationFeed, listen: string, io: StationIo): Promise<LiveServer> {
  const tokens = loadTokens();
  const server = await startLiveServer({ station: feed, listen, tokenStore: tokens.tokens });
  io.print(`live: ${server.url}`);
  for (const url of server.lanUrls)
    if (url !== server.url) io.print(`live (other machines, viewer token needed): ${url}`);
  if (tokens.generated) {
    io.print(
      `Live-feed tokens were made and saved in ${tokens.path} (owner-only); they are shown this once:`,
    );
    io.print(`  control token (start, stop, set-cutoff, mark): ${tokens.tokens.control}`);
    io.print(`  viewer token (watching from another machine): ${tokens.tokens.viewer}`);
  }
  return server;
}
