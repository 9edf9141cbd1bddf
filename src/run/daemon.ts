/**
 * `cellvigil run`: wires a source, the pure core and the sinks together. Lines travel one way
 * (source -> pipeline -> sinks); the only way back to the rig is the session's actions.
 */
import { rm } from 'node:fs/promises';
import { join } from 'node:path';
import { applyCalibration, type Calibration } from '../calibration/calibration.js';
import { loadCalibration } from '../calibration/calibration-file.js';
import { findChemistry } from '../chemistry/chemistries.js';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../chemistry/chemistry-file.js';
import { checkStartVoltage } from '../chemistry/full-scale.js';
import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock, PacedClock } from '../core/host-clock.js';
import { CellvigilError, ErrorCodes, makeError } from '../core/errors.js';
import { packageVersion } from '../core/paths.js';
import { encodeCommand } from '../protocol/codec.js';
import { FLAG_LOAD_ON } from '../protocol/messages.js';
import { describeSchedule } from '../schedule/schedule.js';
import { plausibilityFor } from '../session/plausibility.js';
import { Session } from '../session/session.js';
import type { Action, SessionEnd } from '../session/session-types.js';
import { writeJsonAtomic } from '../sinks/atomic-json.js';
import { LogFile } from '../sinks/log-file.js';
import {
  SAMPLE_HEADER,
  sampleRowMaxBytes,
  SampleRowWriter,
  type SampleRow,
} from '../sinks/sample-row.js';
import { SerialSource } from '../sources/serial-source.js';
import { SimSource } from '../sources/sim-source.js';
import type { Source } from '../sources/source.js';
import { cautionLines } from '../chemistry/cautions.js';
import { EventLog } from '../record/event-log.js';
import { isEventKind, SAFETY_ENDS, type RunEvent } from '../record/events.js';
import { Pipeline } from './pipeline.js';
import { buildResult, CLOCK_WARN_PPM, exitCodeFor, type RunResult } from '../record/result.js';
import { resolveRunConfig, type RunConfig } from './run-config.js';
import { createRunFolder } from './run-folder.js';
import { watchFile } from './file-watch.js';
import { findResumePoint } from './resume.js';
import { findUnfinishedRun } from './unfinished-run.js';
import { startLiveLink, type LiveLink } from './live-link.js';
import type { RunObserver } from './observer.js';
import type { RunRequest } from './run-request.js';
import { StatusPrinter } from './status-line.js';

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
  /** A note from the user in the event log. */
  mark(note: string, by: string): void;
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
/**
 * After the daemon died with the load on, the rig kept discharging until its watchdog cut the
 * load: 5 s after the last heartbeat, which came up to 0.5 s before death, which came up to 1 s
 * (one flush) after the last logged row. The middle of that range, ± 0.75 s.
 */
const UNLOGGED_AFTER_DEATH_S = 5 + 0.5 - 0.25;
const FLUSH_EVERY_MS = 1000;
const CHECKPOINT_EVERY_MS = 5000;
const STATUS_EVERY_MS = 250;

export async function startRun(req: RunRequest, io: RunIo): Promise<RunHandle> {
  const resumeDir =
    req.resume ??
    (req.port !== undefined && !req.fresh
      ? await findUnfinishedRun(req.runs, req.port, Date.now())
      : null);
  const resume = resumeDir !== null ? await findResumePoint(resumeDir) : null;
  // `run --resume <folder>` alone goes back to the port the run was on.
  const src = resume?.run.manifest.source;
  if (src?.kind === 'serial' && req.port === undefined && req.sim === undefined)
    req = { ...req, port: src.description };
  const cfg = await resolveRunConfig(req, resume?.run.manifest ?? null);
  const { profile, chain, chemistry, cells, cutoff, scenario } = cfg;
  const startedWall = resume ? Date.parse(resume.run.manifest.started_wall) : Date.now();
  const label =
    resume?.run.manifest.label ??
    req.label ??
    (scenario ? `sim-${scenario.name}` : `${cells}x${chemistry.id}`);
  const folder = resume ? resume.run.dir : await createRunFolder(req.runs, label, startedWall);

  // Measurement time: the simulated rig runs on a virtual clock at --speed; a real rig on the host's.
  const paced = scenario ? new PacedClock(0, startedWall) : null;
  const clock: Clock = paced ?? new HostClock();
  const real = new HostClock();
  const source: Source = scenario
    ? new SimSource({ scenario, clock, profile })
    : new SerialSource({ path: req.port!, baudRate: req.baud ?? profile.frame.baud });

  const session = new Session({
    channel: req.channel,
    cutoffV: cutoff.total,
    floorV: cfg.floorV,
    maxTemperatureC: cfg.maxTemperatureC,
    maxCurrentA: cfg.maxCurrentA,
    linkTimeoutMs: req.linkTimeoutS * 1000,
    schedule: cfg.schedule,
    plausibility: plausibilityFor({
      maxRestVPerCell: chemistry.max_rest_V_per_cell.value,
      cells,
      ampsPerCount: chain.ampsPerCount,
    }),
    checkRest: (restV) => {
      const check = checkStartVoltage(
        chemistry,
        cells,
        restV,
        cutoff.perCell,
        cfg.chemistries,
        applyCalibration(cfg.calibration).voltage(chain.fullScale().volts),
      );
      return check.ok ? null : check.error.message;
    },
  });
  // A resumed run's row times carry on from its last row, plus the wall time it was down.
  const originMs = resume
    ? clock.now() - (resume.lastHostS * 1000 + Math.max(0, Date.now() - resume.lastWallMs))
    : clock.now();
  if (resume) session.restore(resume.totals);
  const pipeline = new Pipeline({
    channel: req.channel,
    adcBits: profile.adc.bits,
    converter: chain,
    corrector: applyCalibration(cfg.calibration),
    session,
    originMs,
    ...(resume ? { counters: { accepted: resume.rows, ...resume.counters } } : {}),
  });

  const rowWriter = new SampleRowWriter();
  const samples = new LogFile({
    dir: folder,
    name: 'samples-',
    ext: '.csv',
    header: SAMPLE_HEADER,
    rotateBytes: resume?.run.manifest.samples.rotate_bytes ?? req.rotateBytes,
    firstIndex: resume?.nextIndex ?? 1,
    // Closed files are gzipped (about 6:1); the file being written always stays plain.
    compressClosed: true,
    onCompressed: (c) => {
      if (ended) return;
      if (c.error)
        logEvent({
          event: 'compress_failed',
          file: c.file,
          error: c.error.message,
          note: 'the plain file is kept',
        });
      else
        logEvent({
          event: 'sample_file_compressed',
          file: c.file,
          bytes_in: c.bytesIn,
          bytes_out: c.bytesOut,
        });
    },
  });
  const events = new EventLog(folder);
  const status = new StatusPrinter(io.out);
  const observers: RunObserver[] = [];
  const manifest = {
    format: 'cellvigil-run',
    format_version: 1,
    cellvigil_version: packageVersion(),
    node_version: process.version,
    label,
    started_wall: new Date(startedWall).toISOString(),
    source: {
      kind: source.kind,
      description: source.description,
      ...(scenario ? { scenario: scenario.name, speed: req.speed } : {}),
    },
    channel: req.channel,
    rig: { file: cfg.rigPath, profile },
    calibration: {
      file: cfg.calibrationPath,
      id: pipeline.calibrationId,
      content: cfg.calibration,
    },
    chemistry: { id: chemistry.id, profile: chemistry },
    cells,
    cutoff_V: cutoff.total,
    cutoff_per_cell_V: cutoff.perCell,
    cutoff_source: cutoff.source,
    floor_V: cfg.floorV,
    limits: { max_temperature_C: cfg.maxTemperatureC, max_current_A: cfg.maxCurrentA },
    samples: { prefix: 'samples-', rotate_bytes: req.rotateBytes },
    ...(cfg.scheduleSource && cfg.schedule
      ? { schedule: { ...cfg.scheduleSource, description: describeSchedule(cfg.schedule) } }
      : {}),
  };
  try {
    if (!resume) await writeJsonAtomic(join(folder, 'manifest.json'), manifest);
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot write the manifest: ${(e as Error).message}`,
      folder,
      'Choose a run folder you can write to (--runs). Nothing was switched on.',
    );
  }

  const hostS = (): number => (clock.now() - originMs) / 1000;
  const logEvent = (ev: RunEvent): void => {
    const rec = events.write(hostS(), clock.wallNow(), ev);
    for (const o of observers) o.event?.(rec);
  };
  /** The session's events: typed by their kind; one this table does not know is logged as it came. */
  const logSessionEvent = (name: string, detail: Record<string, unknown>): void => {
    if (isEventKind(name)) logEvent({ event: name, ...detail } as RunEvent);
    else events.writeForeign(hostS(), clock.wallNow(), name, detail);
  };

  let ended = false;
  let diskError: Error | null = null;
  let loadedSamples = 0;
  let gaps = 0;
  /** Frames that reached the session since this process started: none means the rig never spoke. */
  let framesSeen = 0;
  let clockWarned = false;
  let stopRequests = 0;
  let unloggedPending = resume?.last?.loadOn === true;
  let calibration: Calibration | null = cfg.calibration;
  const watchers: { close(): Promise<void> }[] = [];
  let resolveDone!: (o: RunOutcome) => void;
  let rejectDone!: (e: unknown) => void;
  const done = new Promise<RunOutcome>((res, rej) => {
    resolveDone = res;
    rejectDone = rej;
  });
  const timers: { clock: Clock; handle: TimerHandle }[] = [];
  const every = (c: Clock, ms: number, fn: () => void): void => {
    timers.push({ clock: c, handle: c.setTimer(fn, ms, true) });
  };

  const dispatch = (actions: Action[]): void => {
    for (const a of actions) {
      if (ended) return;
      if (a.type === 'send') {
        const line = encodeCommand(a.command);
        const queued = source.write(line);
        if (a.command.command !== 'BEAT') logEvent({ event: 'command', line: line.trim(), queued });
      } else if (a.type === 'event') {
        logSessionEvent(a.name, a.detail);
        const reason = session.result.reason;
        if (
          a.name === 'state' &&
          a.detail['to'] === 'stopping' &&
          reason &&
          SAFETY_ENDS.has(reason)
        )
          for (const o of observers) o.limitTripped?.(hostS(), reason, String(a.detail['why']));
        if (a.name === 'state')
          status.line(
            `state: ${String(a.detail['from'])} -> ${String(a.detail['to'])} (${String(a.detail['why'])})`,
          );
      } else {
        void finish(a.reason, a.detail, a.loadOffConfirmed);
      }
    }
  };

  const onLine = (text: string): void => {
    if (ended) return;
    const out = pipeline.line(text, clock.now(), clock.wallNow());
    switch (out.kind) {
      case 'sample': {
        framesSeen++;
        if (unloggedPending) {
          unloggedPending = false;
          bridgeUnlogged(out.row);
        }
        try {
          samples.appendWith(out.row, sampleRowMaxBytes(out.row), rowWriter.write);
        } catch (e) {
          onDiskError(e as Error);
        }
        const loadOn = session.loadOn;
        if (loadOn) loadedSamples++;
        if (out.lost > 0) logEvent({ event: 'frames_lost', count: out.lost, seq: out.row.seq });
        if (out.gap) {
          gaps++;
          logEvent({
            event: 'gap',
            seq: out.row.seq,
            note: 'a long gap between frames; its charge is interpolated and counted as doubt in the uncertainty',
          });
        }
        if (out.rigRestart)
          logEvent({ event: 'rig_restart', seq: out.row.seq, tick_ms: out.row.tickMs });
        status.update(out.row);
        for (const o of observers) o.sample?.(out.row, loadOn);
        dispatch(out.actions);
        break;
      }
      case 'rejected':
        events.rejected(hostS(), clock.wallNow(), out.reason, out.detail, text);
        break;
      case 'message':
        if (out.event) logEvent(out.event);
        dispatch(out.actions);
        break;
      case 'ignored':
        break;
    }
  };

  /** The first frame after resuming: estimate what flowed while nothing was logging. */
  const bridgeUnlogged = (row: SampleRow): void => {
    const last = resume!.last!;
    const sinceS = row.hostS - resume!.lastHostS;
    const stillOn = (row.flags & FLAG_LOAD_ON) !== 0;
    const darkS = Math.max(0, stillOn ? sinceS : Math.min(sinceS, UNLOGGED_AFTER_DEATH_S));
    session.integrator.addUnlogged(darkS * 1000, last.volts, last.amps);
    row.chargeAh = session.integrator.chargeAh;
    row.energyWh = session.integrator.energyWh;
    logEvent({
      event: 'unlogged_discharge',
      estimated_s: darkS,
      charge_Ah: (darkS / 3600) * last.amps,
      basis: stillOn
        ? 'the load stayed on through the interruption: the last logged current over the whole gap'
        : "the rig's watchdog cut the load: the last logged current for about 5.25 s (± 0.75 s)",
    });
  };

  /** Whole-string volts, from the CLI handle or the live feed; the session refuses anything below the floor. */
  const setCutoffV = (volts: number, by: string): { ok: true } | { ok: false; error: string } => {
    if (ended) return { ok: false, error: 'the run has ended' };
    const r = session.setCutoff(volts);
    if (!r.ok) {
      logEvent({ event: 'cutoff_refused', requested_V: volts, by, why: r.why });
      return { ok: false, error: r.why };
    }
    logEvent({
      event: 'cutoff_changed',
      cutoff_V: session.cutoffV,
      cutoff_V_per_cell: session.cutoffV / cells,
      by,
    });
    return { ok: true };
  };

  /** A calibration file rewritten mid-run applies from the next sample, if it validates. */
  const reloadCalibration = async (path: string): Promise<void> => {
    if (ended) return;
    try {
      const next = await loadCalibration(path);
      if (ended || next.id === pipeline.calibrationId) return;
      const old = pipeline.calibrationId;
      pipeline.setCorrector(applyCalibration(next));
      calibration = next;
      logEvent({ event: 'calibration_changed', old_id: old, new_id: next.id, file: path });
      status.line(`Calibration ${next.id} applies from the next sample (was ${old}).`);
    } catch (e) {
      if (ended) return;
      const message = (e as Error).message;
      logEvent({
        event: 'calibration_rejected',
        file: path,
        error: message,
        kept_id: pipeline.calibrationId,
      });
      status.line(
        `The edited calibration was rejected and ${pipeline.calibrationId} stays in force: ${message}`,
      );
    }
  };

  /** A chemistry file edited mid-run: new floor, temperature limit and default cutoff, if it validates. */
  const reloadChemistry = (path: string): void => {
    if (ended) return;
    try {
      const next = findChemistry(loadChemistries(path), chemistry.id, path);
      const floorV = next.floor_V_per_cell.value * cells;
      const wanted = cutoff.fromUser ? cutoff.total : next.cutoff_V_per_cell.value * cells;
      const cutoffV = Math.max(wanted, floorV);
      const r = session.updateLimits({
        floorV,
        maxTemperatureC: next.max_temperature_C.value,
        cutoffV,
      });
      if (!r.ok) throw new Error(r.why);
      logEvent({
        event: 'chemistry_changed',
        file: path,
        chemistry: next.id,
        floor_V: floorV,
        cutoff_V: cutoffV,
        max_temperature_C: next.max_temperature_C.value,
      });
      status.line(
        `Chemistry profile reloaded: cutoff ${cutoffV.toFixed(3)} V, floor ${floorV.toFixed(3)} V, limit ${next.max_temperature_C.value} °C.`,
      );
    } catch (e) {
      const message = (e as Error).message;
      logEvent({ event: 'chemistry_rejected', file: path, error: message });
      status.line(`The edited chemistry file was rejected; the limits in force stay: ${message}`);
    }
  };

  const onDiskError = (e: Error): void => {
    if (diskError) return;
    diskError = e;
    status.line(
      `cellvigil: ${ErrorCodes.RUN_FOLDER}: writing the run folder failed: ${e.message}. Switching the load off.`,
    );
    dispatch(session.requestStop(clock.now(), 'a failure writing the run folder'));
  };

  const flushLogs = async (): Promise<void> => {
    try {
      await Promise.all([samples.flush(), events.flush()]);
    } catch (e) {
      onDiskError(e as Error);
    }
  };

  const checkpoint = (): object => ({
    host_s: Number(hostS().toFixed(3)),
    wall_time: new Date(clock.wallNow()).toISOString(),
    state: session.state,
    charge_Ah: session.integrator.chargeAh,
    energy_Wh: session.integrator.energyWh,
    load_on_s: session.integrator.onMs / 1000,
    bridged_Ah: session.integrator.bridgedAh,
    frames_accepted: pipeline.counters.accepted,
    frames_rejected: pipeline.counters.rejected,
    frames_lost: pipeline.counters.lost,
    rows_written: pipeline.counters.accepted,
    sample_file: samples.files.at(-1) ?? null,
    cutoff_V: session.cutoffV,
    calibration_id: pipeline.calibrationId,
  });
  let checkpointing = false;
  const writeCheckpoint = async (): Promise<void> => {
    if (checkpointing || diskError) return;
    checkpointing = true;
    try {
      await writeJsonAtomic(join(folder, 'checkpoint.json'), checkpoint());
    } catch (e) {
      onDiskError(e as Error);
    } finally {
      checkpointing = false;
    }
  };

  const checkClock = (): void => {
    const ppm = pipeline.rigClockErrorPpm();
    if (clockWarned || ppm === null || Math.abs(ppm) <= CLOCK_WARN_PPM) return;
    clockWarned = true;
    const pct = (ppm / 1e4).toFixed(1);
    logEvent({ event: 'clock_warning', rig_clock_error_ppm: Math.round(ppm) });
    status.line(
      `warning: the rig's clock runs ${pct} % ${ppm > 0 ? 'fast' : 'slow'} against the host's; cellvigil times every frame by the host clock, so figures are not affected.`,
    );
  };

  const onSignal = (sig: NodeJS.Signals): void => {
    // Kept until the process exits: a signal while the result is written must not cut it short.
    if (ended) {
      status.line(`${sig}: the run has ended; writing its files…`);
      return;
    }
    stopRequests++;
    logEvent({ event: 'signal', signal: sig });
    if (stopRequests > 1)
      status.line(
        `${sig} again: the load is being switched off first; the run ends as soon as the rig confirms it.`,
      );
    else status.line(`${sig}: switching the load off and finishing the run…`);
    dispatch(session.requestStop(clock.now(), sig));
  };
  const signalHandlers: [NodeJS.Signals, (s: NodeJS.Signals) => void][] = io.signals
    ? [
        ['SIGINT', onSignal],
        ['SIGTERM', onSignal],
      ]
    : [];

  const finish = async (
    end: SessionEnd,
    detail: string,
    loadOffConfirmed: boolean,
  ): Promise<void> => {
    if (ended) return;
    ended = true;
    try {
      for (const t of timers) t.clock.clearTimer(t.handle);
      await Promise.all(watchers.map((w) => w.close())).catch(() => undefined);
      checkClock();
      const result = buildResult({
        end,
        detail,
        loadOffConfirmed,
        chargeAh: session.integrator.chargeAh,
        energyWh: session.integrator.energyWh,
        onMs: session.integrator.onMs,
        bridgedAh: session.integrator.bridgedAh,
        nominalAh: pipeline.nominalAh,
        loadedSamples,
        lastLoadedV: session.lastLoadedV,
        cutoffV: session.cutoffV,
        counters: pipeline.counters,
        implausibleFrames: session.plausibility.implausibleFrames,
        rigClockErrorPpm: pipeline.rigClockErrorPpm(),
        calibration,
        calibrationId: pipeline.calibrationId,
        ampsPerCount: chain.ampsPerCount,
        voltsPerCount: chain.voltsPerCount,
        chemistry: chemistry.id,
        cells,
        openCircuitV: session.openCircuitV,
        dcResistanceOhm: session.dcResistanceOhm,
        gaps,
        startedWallMs: startedWall,
        endedWallMs: clock.wallNow(),
        schedule: cfg.schedule ? describeSchedule(cfg.schedule) : null,
      });
      events.summarise(hostS(), clock.wallNow());
      const rec = events.write(hostS(), clock.wallNow(), {
        event: 'run_ended',
        end_reason: end,
        detail,
        load_off_confirmed: loadOffConfirmed,
      });
      for (const o of observers) o.event?.(rec);
      await source.close().catch(() => undefined);
      paced?.stop();
      await Promise.all([samples.close(), events.close()]).catch((e: Error) => onDiskError(e));
      if (!diskError) {
        await writeJsonAtomic(join(folder, 'checkpoint.json'), checkpoint()).catch((e: Error) =>
          onDiskError(e),
        );
        await writeJsonAtomic(join(folder, 'result.json'), result).catch((e: Error) =>
          onDiskError(e),
        );
      }
      status.end();
      for (const o of observers) o.ended?.(result);
      const exitCode = diskError ? 1 : exitCodeFor(end, framesSeen === 0);
      printSummary(io, result, folder, cfg, diskError, framesSeen === 0);
      resolveDone({ exitCode, folder, result });
    } catch (e) {
      rejectDone(e);
    }
  };

  // Start: cautions first, then the rig.
  status.line(
    `cellvigil ${packageVersion()}: ${cells} × ${chemistry.id} on ${source.description}; cutoff ${cutoff.total.toFixed(3)} V (${cutoff.perCell} V per cell, ${cutoff.source}), limit ${cfg.maxTemperatureC} °C.`,
  );
  if (cfg.schedule) status.line(`Schedule: ${describeSchedule(cfg.schedule)}.`);
  status.line('Cautions:');
  for (const c of cautionLines(chemistry)) status.line(`  - ${c}`);
  status.line(`Run folder: ${folder}`);
  if (resume) {
    const downS = Math.max(0, Date.now() - resume.lastWallMs) / 1000;
    status.line(
      `Resuming an interrupted run: ${(resume.totals.chargeAh * 1000).toFixed(1)} mAh so far from ${resume.rows} logged rows; down for ${downS.toFixed(0)} s. The precheck runs again before the load goes back on.`,
    );
    logEvent({
      event: 'resumed',
      rows: resume.rows,
      charge_Ah: resume.totals.chargeAh,
      energy_Wh: resume.totals.energyWh,
      down_s: downS,
      cut_bytes: resume.cutBytes,
      source: source.description,
    });
  } else {
    logEvent({
      event: 'run_started',
      source: source.description,
      chemistry: chemistry.id,
      cells,
      cutoff_V: cutoff.total,
      version: packageVersion(),
    });
  }
  logEvent({ event: 'cautions', lines: cautionLines(chemistry) });
  if (cfg.calibration) {
    logEvent({
      event: 'calibration',
      id: cfg.calibration.id,
      file: cfg.calibrationPath,
      date: cfg.calibration.date,
    });
  } else {
    logEvent({
      event: 'calibration',
      id: 'none',
      note: 'no calibration: nominal analog chain only',
    });
    status.line(
      'No calibration given: figures use the nominal analog chain, whose offset and gain errors are unknown (see `cellvigil calibrate`).',
    );
  }

  /** A run that never got its rig leaves no folder behind (it would look like one to resume). */
  const abandon = async (): Promise<void> => {
    await Promise.all([samples.close(), events.close()]).catch(() => undefined);
    if (!resume) await rm(folder, { recursive: true, force: true }).catch(() => undefined);
  };
  let live: LiveLink | null = null;
  if (req.listen !== null) {
    try {
      live = await startLiveLink({
        listen: req.listen,
        info: {
          label,
          run_folder: folder,
          chemistry: chemistry.id,
          cells,
          cutoff_V: session.cutoffV,
          floor_V: cfg.floorV,
          calibration_id: pipeline.calibrationId,
          started_wall: new Date(startedWall).toISOString(),
          source: source.description,
          max_temperature_C: cfg.maxTemperatureC,
        },
        stop: (by) => dispatch(session.requestStop(clock.now(), by)),
        setCutoff: (volts, by) => setCutoffV(volts, by),
        mark: (note, by) => logEvent({ event: 'mark', note, by }),
        log: (ev) => {
          if (!ended) logEvent(ev);
        },
        print: (line) => status.line(line),
      });
      observers.push(live.observer);
    } catch (e) {
      await abandon();
      throw e;
    }
  }

  try {
    await source.open({
      line: onLine,
      overlong: (n) => {
        const out = pipeline.overlong(n);
        if (out.kind === 'rejected')
          events.rejected(hostS(), clock.wallNow(), out.reason, out.detail, '');
      },
      closed: (reason) => {
        if (ended) return;
        logEvent({ event: 'link_closed', reason });
        status.line(
          `The rig's port went away (${reason}); reopening it. The rig's watchdog cuts the load after 5 s without heartbeats.`,
        );
        dispatch(session.linkDown(clock.now()));
      },
      reopened: () => {
        if (ended) return;
        status.line('The rig is back; reading its load state before anything else.');
        dispatch(session.linkUp(clock.now()));
      },
    });
  } catch (e) {
    ended = true;
    await live?.server.close().catch(() => undefined);
    await abandon();
    throw e instanceof CellvigilError
      ? e
      : makeError(
          ErrorCodes.PORT_OPEN,
          (e as Error).message,
          source.description,
          'Check the rig connection.',
        );
  }
  for (const [sig, h] of signalHandlers) process.on(sig, h);
  if (cfg.calibrationPath !== null)
    watchers.push(
      watchFile(cfg.calibrationPath, () => void reloadCalibration(cfg.calibrationPath!)),
    );
  if (!resume) {
    const chemistriesPath = req.chemistriesFile ?? DEFAULT_CHEMISTRIES_PATH;
    watchers.push(watchFile(chemistriesPath, () => reloadChemistry(chemistriesPath)));
  }
  every(clock, TICK_MS, () => dispatch(session.tick(clock.now())));
  every(real, FLUSH_EVERY_MS, () => void flushLogs());
  every(real, CHECKPOINT_EVERY_MS, () => {
    checkClock();
    void writeCheckpoint();
  });
  every(real, STATUS_EVERY_MS, () => status.draw(real.now()));
  dispatch(session.begin(clock.now()));
  paced?.start(req.speed);

  return {
    folder,
    config: cfg,
    source,
    done,
    stop: (by) => dispatch(session.requestStop(clock.now(), by)),
    setCutoffPerCell: (volts, by) => setCutoffV(volts * cells, by),
    mark: (note, by) => logEvent({ event: 'mark', note, by }),
    addObserver: (o) => observers.push(o),
    liveUrl: live?.server.url ?? null,
    closeLive: async () => {
      await live?.server.close();
    },
  };
}

function printSummary(
  io: RunIo,
  r: RunResult,
  folder: string,
  cfg: RunConfig,
  diskError: Error | null,
  rigNeverSpoke: boolean,
): void {
  const w = (s: string): boolean => io.out.write(`${s}\n`);
  w('');
  if (r.end_reason === 'refused') {
    io.err.write(
      `cellvigil: ${rigNeverSpoke ? ErrorCodes.RIG_SILENT : ErrorCodes.PRECHECK_REFUSED}: ${r.end_detail}\n`,
    );
  }
  w(
    `Run ended: ${r.end_reason} (${r.end_detail})${r.load_off_confirmed ? '' : ' — load-off NOT confirmed by the rig; its watchdog cuts the load within 5 s'}`,
  );
  const u = r.uncertainty.capacity_Ah;
  w(
    `  capacity      ${(r.capacity_Ah * 1000).toFixed(1)} mAh ± ${(u.expanded * 1000).toFixed(1)} mAh (k = 2)`,
  );
  w(
    `  energy        ${r.energy_Wh.toFixed(4)} Wh ± ${r.uncertainty.energy_Wh.expanded.toFixed(4)} Wh (k = 2)`,
  );
  w(
    `  load on       ${r.duration_s.toFixed(1)} s; mean ${r.mean_voltage_V?.toFixed(3) ?? '—'} V, end ${r.end_voltage_V?.toFixed(3) ?? '—'} V, cutoff ${r.cutoff_V.toFixed(3)} V`,
  );
  w(
    `  frames        ${r.frames_accepted} accepted, ${r.frames_rejected} rejected, ${r.frames_lost} lost`,
  );
  w(
    `  rig clock     ${r.rig_clock_error_ppm === null ? 'too short a run to estimate' : `${r.rig_clock_error_ppm} ppm${r.rig_clock_warning ? ' (more than 1 %; the host clock was used)' : ''}`}`,
  );
  w(`  calibration   ${r.calibration_id}${cfg.calibration ? '' : ' (nominal chain)'}`);
  if (diskError)
    io.err.write(
      `cellvigil: ${ErrorCodes.RUN_FOLDER}: ${diskError.message} (${folder}). Free space or fix permissions; the load was switched off.\n`,
    );
  w(`  run folder    ${folder}`);
}
