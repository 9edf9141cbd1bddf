/**
 * `cellvigil run`: wiring. A rig link (the port), one channel's run (session, recorder, result)
 * on it, the controls (signals, edited files, the live feed's requests) and the timers. Lines
 * travel one way (link -> channel -> recorder and observers); the only way back to the rig is
 * the session's actions.
 */
import { rm } from 'node:fs/promises';
import { DEFAULT_CHEMISTRIES_PATH } from '../chemistry/chemistry-file.js';
import type { Clock, TimerHandle } from '../core/clock.js';
import type { CellvigilError } from '../core/errors.js';
import { missingChannel } from '../protocol/hello-check.js';
import { HostClock, PacedClock } from '../core/host-clock.js';
import type { RunResult } from '../record/result.js';
import { SerialSource } from '../sources/serial-source.js';
import { SimSource } from '../sources/sim-source.js';
import type { Source } from '../sources/source.js';
import { ChannelRun, type ChannelOutcome, type ChannelRunOptions } from './channel-run.js';
import { changeCutoff, handleSignals, watchRunFiles, type Watcher } from './controls.js';
import { liveObserver, startLiveLink, type LiveLink } from './live-link.js';
import type { LiveHub } from '../live/live-hub.js';
import type { RunObserver } from './observer.js';
import { RunRecorder } from './recorder.js';
import { startRunHooks, type RunHooks } from './run-hooks.js';
import { findResumePoint, type ResumePoint } from './resume.js';
import { RigLink } from './rig-link.js';
import { resolveRunConfig, type RunConfig } from './run-config.js';
import { createRunFolder } from './run-folder.js';
import type { RunRequest } from './run-request.js';
import { announceStart, manifestOf, printSummary } from './start-report.js';
import { StatusPrinter } from './status-line.js';
import { findUnfinishedRun } from './unfinished-run.js';

export type { RunObserver } from './observer.js';

export interface RunOutcome {
  exitCode: number;
  folder: string;
  result: RunResult;
}

export interface RunHandle {
  readonly folder: string;
  readonly config: RunConfig;
  readonly source: Source;
  readonly done: Promise<RunOutcome>;
  /** Asks for a stop (load off, result written). */
  stop(by: string): void;
  /** Sets the cutoff per cell; refused below the chemistry's floor. */
  setCutoffPerCell(volts: number, by: string): { ok: true } | { ok: false; error: string };
  /** A note from the user in the event log; refused when too long or too frequent. */
  mark(note: string, by: string): { ok: true } | { ok: false; error: string };
  addObserver(o: RunObserver): void;
  /** The live page's address, or null without a live feed. */
  readonly liveUrl: string | null;
  /** Stops serving the live feed (after the run, when the caller is done showing the result). */
  closeLive(): Promise<void>;
}

export interface RunIo {
  out: NodeJS.WritableStream & { isTTY?: boolean };
  err: NodeJS.WritableStream;
  /** Handle SIGINT/SIGTERM (the CLI does; tests driving startRun in-process do not). */
  signals?: boolean;
}

const TICK_MS = 100;
/** Rows written to their files (what a crash of the daemon can cost). */
const FLUSH_EVERY_MS = 1000;
/** Rows synced to the disk, then the checkpoint (what a power loss can cost). */
const CHECKPOINT_EVERY_MS = 5000;
const STATUS_EVERY_MS = 250;

/** Repeating timers on one clock or another, cleared together when the run ends. */
class RunTimers {
  private readonly timers: { clock: Clock; handle: TimerHandle }[] = [];
  private readonly leaves: (() => void)[] = [];
  every(clock: Clock, ms: number, fn: () => void): void {
    this.timers.push({ clock, handle: clock.setTimer(fn, ms, true) });
  }
  /** Shared timers: `leave` takes the run out of them when the run's timers are cleared. */
  onClear(leave: () => void): void {
    this.leaves.push(leave);
  }
  clear(): void {
    for (const t of this.timers) t.clock.clearTimer(t.handle);
    this.timers.length = 0;
    for (const leave of this.leaves.splice(0)) leave();
  }
}

/** What a station's shared timers call on a run, on the periods of the run's own timers. */
export interface TimedRun {
  tick(): void;
  flush(): Promise<void>;
  checkpoint(): void;
  draw(realNowMs: number): void;
}

/** What a station hands a channel's run instead of letting it make its own. */
export interface RunParts {
  /** The channel's view of its rig's shared link. */
  source?: Source;
  /** The station's clock (a simulated station's virtual one); the run neither starts nor stops it. */
  clock?: Clock;
  /** The channel's hub in the station's live feed, instead of a live server of the run's own. */
  hub?: LiveHub;
  /** The station's timers, one set for all its channels (tick on `clock`, null: host time). */
  timers?: { join(run: TimedRun, clock: Clock | null): () => void };
}

/** The run to continue, if any: `--resume`, or an unfinished run on the same port. */
async function locateRun(
  req: RunRequest,
): Promise<{ req: RunRequest; resume: ResumePoint | null }> {
  const resumeDir =
    req.resume ??
    (req.port !== undefined && !req.fresh
      ? await findUnfinishedRun(req.runs, req.port, Date.now())
      : null);
  const resume = resumeDir !== null ? await findResumePoint(resumeDir) : null;
  // `run --resume <folder>` alone goes back to the port the run was on.
  const src = resume?.run.manifest.source;
  if (src?.kind === 'serial' && req.port === undefined && req.sim === undefined)
    return { req: { ...req, port: src.description }, resume };
  return { req, resume };
}

export async function startRun(
  asked: RunRequest,
  io: RunIo,
  parts: RunParts = {},
): Promise<RunHandle> {
  const { req, resume } = await locateRun(asked);
  const cfg = await resolveRunConfig(req, resume?.run.manifest ?? null);
  const { chemistry, scenario } = cfg;
  const { startedWallMs, label, folder } = await placeRun(req, cfg, resume);

  // Measurement time: the simulated rig runs on a virtual clock at --speed; a real rig on the host's.
  const paced = scenario && !parts.clock ? new PacedClock(0, startedWallMs) : null;
  const clock: Clock = parts.clock ?? paced ?? new HostClock();
  const link = new RigLink(
    parts.source ?? rigSource(req, cfg, clock, `run "${label}" (${folder})`),
  );
  const status = new StatusPrinter(io.out);
  const timers = new RunTimers();
  let watchers: Watcher[] = [];
  const run = newChannelRun(req, cfg, {
    folder,
    startedWallMs,
    clock,
    resume,
    status,
    link,
    stopInputs: async () => {
      timers.clear();
      await Promise.all(watchers.map((w) => w.close())).catch(() => undefined);
    },
    releaseLink: () => paced?.stop(),
  });
  const wrongChannel = refuseMissingChannel(run, req.channel);
  const manifest = { req, cfg, label, startedWallMs, source: link.source };
  if (!resume)
    await RunRecorder.writeManifest(
      folder,
      manifestOf({ ...manifest, calibrationId: run.pipeline.calibrationId }),
    );
  announceStart(run, status, { cfg, folder, source: link.description, resume });

  const live = await connect(req, cfg, run, link, status, {
    hub: parts.hub ?? null,
    label,
    folder,
    startedWallMs,
    resumed: resume !== null,
  });
  // Only now: a port that fails to open leaves no folder behind to point to.
  if (!run.isEnded) status.line(`Run folder: ${folder}`);
  const hooks = startRunHooks(req, live?.hub ?? null, (line) => status.line(line));
  if (io.signals) handleSignals(run, status);
  watchers = watchRunFiles(run, status, {
    calibration: cfg.calibrationPath,
    // A resumed run too: a reload may only tighten the limits it was started with.
    chemistries: req.chemistriesFile ?? DEFAULT_CHEMISTRIES_PATH,
    chemistryId: chemistry.id,
  });
  startTimers(timers, run, clock, status, parts);
  run.begin();
  paced?.start(req.speed);

  const done = run.done.then((end) =>
    settleRun(end, io, {
      folder,
      calibrated: cfg.calibration !== null,
      // A refused one-channel run measured nothing: its folder would only look like a run.
      dropRefused: !resume && parts.source === undefined,
      wrongChannel,
      hooks,
    }),
  );
  return handleOf(run, status, { folder, cfg, source: link.source, done, live, hooks });
}

function handleOf(
  run: ChannelRun,
  status: StatusPrinter,
  x: {
    folder: string;
    cfg: RunConfig;
    source: Source;
    done: Promise<RunOutcome>;
    live: LiveLink | null;
    hooks: RunHooks;
  },
): RunHandle {
  const { cells } = x.cfg;
  return {
    folder: x.folder,
    config: x.cfg,
    source: x.source,
    done: x.done,
    stop: (by) => run.stop(by),
    setCutoffPerCell: (volts, by) => changeCutoff(run, status, { volts: volts * cells, by, cells }),
    mark: (note, by) => run.mark(note, by),
    addObserver: (o) => run.addObserver(o),
    liveUrl: x.live?.server.url ?? null,
    closeLive: async () => {
      await x.hooks.close();
      await x.live?.server.close();
    },
  };
}

/** The rig of a one-channel run: the simulated one at --speed, or the port. */
function rigSource(req: RunRequest, cfg: RunConfig, clock: Clock, holder: string): Source {
  if (cfg.scenario) return new SimSource({ scenario: cfg.scenario, clock, profile: cfg.profile });
  return new SerialSource({
    path: req.port!,
    baudRate: req.baud ?? cfg.profile.frame.baud,
    // A second run on this port is refused with this: which run holds it.
    holder,
  });
}

/** After the result: the summary, the refused run's folder removed, the run filed. */
async function settleRun(
  end: ChannelOutcome,
  io: RunIo,
  x: {
    folder: string;
    calibrated: boolean;
    dropRefused: boolean;
    wrongChannel: () => CellvigilError | null;
    hooks: RunHooks;
  },
): Promise<RunOutcome> {
  const { folder } = x;
  const channelError = x.wrongChannel();
  if (channelError) {
    // The load never went on: no frame of that channel can come.
    const removed = x.dropRefused && (await removeFolder(folder));
    io.err.write(`cellvigil: ${channelError.code}: ${channelError.message}\n`);
    if (!removed) io.out.write(`Its record: ${folder}\n`);
    return { exitCode: channelError.exitCode, folder, result: end.result };
  }
  const removed =
    x.dropRefused && end.result.end_reason === 'refused' && (await removeFolder(folder));
  printSummary(io, end, folder, x.calibrated, !removed);
  if (!removed) await x.hooks.ended(folder, end.result);
  return { exitCode: end.exitCode, folder, result: end.result };
}

/**
 * A `--channel` the rig's hello does not have is refused as soon as the hello comes (the run
 * would otherwise wait for frames that never come and call the rig silent). Returns the error,
 * once there is one.
 */
function refuseMissingChannel(run: ChannelRun, channel: number): () => CellvigilError | null {
  let error: CellvigilError | null = null;
  run.addObserver({
    event: (rec) => {
      if (rec.event !== 'rig_hello' || error !== null) return;
      error = missingChannel(channel, { channels: rec.channels, rigId: rec.rig_id });
      if (error) run.stop(`the rig's hello (it has no channel ${channel})`);
    },
  });
  return () => error;
}

/** True once the folder is gone. */
async function removeFolder(folder: string): Promise<boolean> {
  return rm(folder, { recursive: true, force: true }).then(
    () => true,
    () => false,
  );
}

function newChannelRun(
  req: RunRequest,
  cfg: RunConfig,
  x: Pick<ChannelRunOptions, 'folder' | 'startedWallMs' | 'clock' | 'resume' | 'status'> & {
    link: RigLink;
    stopInputs(): Promise<void>;
    /** After the link is closed. */
    releaseLink(): void;
  },
): ChannelRun {
  const { link, releaseLink, ...rest } = x;
  return new ChannelRun({
    ...rest,
    cfg,
    channel: req.channel,
    linkTimeoutS: req.linkTimeoutS,
    rotateBytes: req.rotateBytes,
    send: (line) => link.send(line),
    releaseLink: async () => {
      await link.close();
      releaseLink();
    },
  });
}

/** When the run started, its label and its folder (a resumed run's own). */
async function placeRun(
  req: RunRequest,
  cfg: RunConfig,
  resume: ResumePoint | null,
): Promise<{ startedWallMs: number; label: string; folder: string }> {
  const m = resume?.run.manifest;
  const startedWallMs = m ? Date.parse(m.started_wall) : Date.now();
  const label =
    m?.label ??
    req.label ??
    (cfg.scenario ? `sim-${cfg.scenario.name}` : `${cfg.cells}x${cfg.chemistry.id}`);
  const folder = resume ? resume.run.dir : await createRunFolder(req.runs, label, startedWallMs);
  return { startedWallMs, label, folder };
}

/** The session's tick on measurement time; flushes, checkpoints and the status line on real time. */
function startTimers(
  timers: RunTimers,
  run: ChannelRun,
  clock: Clock,
  status: StatusPrinter,
  parts: RunParts,
): void {
  const timed: TimedRun = {
    tick: () => run.tick(),
    flush: () => run.flush(),
    checkpoint: () => {
      run.checkClock();
      void run.writeCheckpoint();
    },
    draw: (nowMs) => status.draw(nowMs),
  };
  if (parts.timers) return timers.onClear(parts.timers.join(timed, parts.clock ?? null));
  const real = new HostClock();
  timers.every(clock, TICK_MS, timed.tick);
  timers.every(real, FLUSH_EVERY_MS, () => void timed.flush());
  timers.every(real, CHECKPOINT_EVERY_MS, timed.checkpoint);
  timers.every(real, STATUS_EVERY_MS, () => timed.draw(real.now()));
}

/**
 * The live feed, then the rig. A run that never got its rig leaves no folder behind (it would
 * look like one to resume).
 */
async function connect(
  req: RunRequest,
  cfg: RunConfig,
  run: ChannelRun,
  link: RigLink,
  status: StatusPrinter,
  x: {
    hub: LiveHub | null;
    label: string;
    folder: string;
    startedWallMs: number;
    resumed: boolean;
  },
): Promise<LiveLink | null> {
  let live: LiveLink | null = null;
  try {
    live = await startLive(req, cfg, run, status, { ...x, source: link.description });
    await link.open(run);
    return live;
  } catch (e) {
    await live?.server.close().catch(() => undefined);
    await run.abandon();
    if (!x.resumed) await rm(x.folder, { recursive: true, force: true }).catch(() => undefined);
    throw e;
  }
}

/**
 * The live feed of the run: the station's hub for a station's channel, else a server of the
 * run's own unless `--no-live`.
 */
async function startLive(
  req: RunRequest,
  cfg: RunConfig,
  run: ChannelRun,
  status: StatusPrinter,
  x: { hub: LiveHub | null; label: string; folder: string; startedWallMs: number; source: string },
): Promise<LiveLink | null> {
  const info = {
    label: x.label,
    run_folder: x.folder,
    chemistry: cfg.chemistry.id,
    cells: cfg.cells,
    cutoff_V: run.session.cutoffV,
    floor_V: cfg.floorV,
    calibration_id: run.pipeline.calibrationId,
    started_wall: new Date(x.startedWallMs).toISOString(),
    source: x.source,
    max_temperature_C: cfg.maxTemperatureC,
  };
  if (x.hub) {
    x.hub.setRun(info);
    run.addObserver(liveObserver(x.hub));
    return null;
  }
  if (req.listen === null) return null;
  const live = await startLiveLink({
    listen: req.listen,
    info,
    channel: req.channel,
    stop: (by) => run.stop(by),
    setCutoff: (volts, by) => changeCutoff(run, status, { volts, by, cells: cfg.cells }),
    mark: (note, by) => run.mark(note, by),
    log: (ev) => {
      if (!run.isEnded) run.log(ev);
    },
    print: (line) => status.line(line),
  });
  run.addObserver(live.observer);
  return live;
}
