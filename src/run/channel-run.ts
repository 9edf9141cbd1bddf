/**
 * One channel's run: its session and pipeline, its recorder (the run folder) and its result.
 * It takes the rig's lines and link changes from whatever carries them, and hands the session's
 * commands back through `send`; it never touches a port itself, so one rig link can carry several
 * channels and one daemon several links.
 */
import { applyCalibration, type Calibration } from '../calibration/calibration.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { checkStartVoltage } from '../chemistry/full-scale.js';
import type { Clock } from '../core/clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { FLAG_LOAD_ON } from '../protocol/messages.js';
import { reloadProblem, type OperatingPoint } from '../calibration/reload-check.js';
import { encodeCommand } from '../protocol/codec.js';
import type { Checkpoint } from '../record/checkpoint.js';
import { isEventKind, SAFETY_ENDS, type RunEvent } from '../record/events.js';
import { buildResult, CLOCK_WARN_PPM, exitCodeFor, type RunResult } from '../record/result.js';
import { describeSchedule } from '../schedule/schedule.js';
import { plausibilityFor } from '../session/plausibility.js';
import { Session } from '../session/session.js';
import type { Action, SessionEnd } from '../session/session-types.js';
import type { SampleRow } from '../sinks/sample-row.js';
import type { RunObserver } from './observer.js';
import { Pipeline } from './pipeline.js';
import { RunRecorder } from './recorder.js';
import { framesLostAcrossResume, type ResumePoint } from './resume.js';
import type { RunConfig } from './run-config.js';
import type { StatusPrinter } from './status-line.js';
import { bridgeUnlogged } from './unlogged.js';
import { chargerAmpsPerCount, newProgramSession } from './program-parts.js';
import { ProgramSession } from '../program/program-session.js';
import { withProgram } from '../report/program-result.js';
import { encodeForRig } from '../protocol/capabilities.js';
import { appendSegment } from '../record/segments.js';

/** A mark's note: as long as the live feed's schema allows. */
export const MARK_MAX_CHARS = 500;
/** Marks taken a minute: a person's notes, never a script's flood filling the event log. */
export const MARKS_PER_MINUTE = 30;

export interface ChannelRunOptions {
  cfg: RunConfig;
  channel: number;
  linkTimeoutS: number;
  folder: string;
  rotateBytes: number;
  /** When the run started (a resumed run: when it first started). */
  startedWallMs: number;
  /** Measurement time: the host's monotonic clock, or the simulated rig's virtual one. */
  clock: Clock;
  resume: ResumePoint | null;
  status: StatusPrinter;
  /** A framed command line for the rig; false when it could not be queued. */
  send(line: string): boolean;
  /** When the channel ends: stop everything that feeds it (timers, file watchers). */
  stopInputs(): Promise<void>;
  /** After its last event: let go of the rig link. */
  releaseLink(): Promise<void>;
}

export interface ChannelOutcome {
  exitCode: number;
  result: RunResult;
  diskError: Error | null;
  /** The run was refused before a single valid frame: the rig never spoke. */
  rigNeverSpoke: boolean;
}

export class ChannelRun {
  readonly session: Session;
  readonly pipeline: Pipeline;
  readonly recorder: RunRecorder;
  readonly done: Promise<ChannelOutcome>;
  /** Host ms of the run's origin: sample rows count seconds from it. */
  readonly originMs: number;
  private readonly observers: RunObserver[] = [];
  private ended = false;
  private loadedSamples = 0;
  private gaps = 0;
  /** Frames that reached the session since this process started. */
  private framesSeen = 0;
  private clockWarned = false;
  private lastRow: SampleRow | null = null;
  private markMinuteStart = -Infinity;
  private marksThisMinute = 0;
  private unloggedPending: boolean;
  /** The first frame after a resume still to be compared with the last one logged. */
  private resumeSeqPending: boolean;
  private calibration: Calibration | null;
  private settle!: (o: ChannelOutcome) => void;
  private fail!: (e: unknown) => void;

  constructor(private readonly o: ChannelRunOptions) {
    const { cfg, resume, clock } = o;
    this.calibration = cfg.calibration;
    this.unloggedPending = resume?.last?.loadOn === true;
    this.resumeSeqPending = (resume?.seq ?? null) !== null;
    // A resumed run's row times carry on from its last row, plus the wall time it was down.
    this.originMs = resume
      ? clock.now() - (resume.lastHostS * 1000 + Math.max(0, Date.now() - resume.lastWallMs))
      : clock.now();
    this.session = cfg.program
      ? newProgramSession(cfg, { ...o, originMs: this.originMs })
      : newSession(o);
    if (resume) this.session.restore(resume.totals);
    this.pipeline = new Pipeline({
      channel: o.channel,
      adcBits: cfg.profile.adc.bits,
      converter: cfg.chain,
      corrector: applyCalibration(cfg.calibration),
      session: this.session,
      originMs: this.originMs,
      chargerAmpsPerCount: chargerAmpsPerCount(cfg),
      ...(resume ? { counters: { accepted: resume.rows, ...resume.counters } } : {}),
    });
    this.recorder = new RunRecorder({
      folder: o.folder,
      rotateBytes: resume?.run.manifest.samples.rotate_bytes ?? o.rotateBytes,
      firstIndex: resume?.nextIndex ?? 1,
      now: () => ({ hostS: this.hostS(), wallMs: clock.wallNow() }),
      written: (rec) => {
        for (const ob of this.observers) ob.event?.(rec);
      },
      diskError: (e) => this.diskError(e),
    });
    this.done = new Promise<ChannelOutcome>((res, rej) => {
      this.settle = res;
      this.fail = rej;
    });
  }

  get isEnded(): boolean {
    return this.ended;
  }

  addObserver(ob: RunObserver): void {
    this.observers.push(ob);
  }

  hostS(): number {
    return (this.o.clock.now() - this.originMs) / 1000;
  }

  log(ev: RunEvent): void {
    this.recorder.event(ev);
  }

  /** Starts the clock for "rig silent" and asks the rig for its hello. */
  begin(): void {
    this.dispatch(this.session.begin(this.o.clock.now()));
  }

  tick(): void {
    this.dispatch(this.session.tick(this.o.clock.now()));
  }

  /** One line from the rig. */
  line(text: string): void {
    if (this.ended) return;
    const clock = this.o.clock;
    const out = this.pipeline.line(text, clock.now(), clock.wallNow());
    switch (out.kind) {
      case 'sample':
        this.sample(out.row, out.lost, out.gap, out.rigRestart);
        this.dispatch(out.actions);
        break;
      case 'rejected':
        this.recorder.rejected(out.reason, out.detail, text);
        break;
      case 'message':
        this.recorder.rigLine(out.event);
        this.dispatch(out.actions);
        break;
      case 'capability':
        this.dispatch(out.actions);
        break;
      case 'ignored':
        break;
    }
  }

  /** A run of bytes without a line end, dropped by the line splitter. */
  overlong(length: number): void {
    const out = this.pipeline.overlong(length);
    if (out.kind === 'rejected') this.recorder.rejected(out.reason, out.detail, '');
  }

  linkClosed(reason: string): void {
    if (this.ended) return;
    this.log({ event: 'link_closed', reason });
    this.o.status.line(
      `The rig's port went away (${reason}); reopening it. The rig's watchdog cuts the load after 5 s without heartbeats.`,
    );
    this.dispatch(this.session.linkDown(this.o.clock.now()));
  }

  linkReopened(): void {
    if (this.ended) return;
    this.o.status.line('The rig is back; reading its load state before anything else.');
    this.dispatch(this.session.linkUp(this.o.clock.now()));
  }

  /** Asks for a stop: the load off, then the result. */
  stop(by: string): void {
    this.dispatch(this.session.requestStop(this.o.clock.now(), by));
  }

  /** A note from the user in the event log: refused when too long or too frequent. */
  mark(note: string, by: string): { ok: true } | { ok: false; error: string } {
    if (this.ended) return { ok: false, error: 'the run has ended' };
    if (note.length > MARK_MAX_CHARS)
      return {
        ok: false,
        error: `the note is ${note.length} characters; at most ${MARK_MAX_CHARS} are taken`,
      };
    const now = this.o.clock.now();
    if (now - this.markMinuteStart >= 60_000) {
      this.markMinuteStart = now;
      this.marksThisMinute = 0;
    }
    if (this.marksThisMinute >= MARKS_PER_MINUTE)
      return {
        ok: false,
        error: `at most ${MARKS_PER_MINUTE} marks a minute are taken; this one was not logged, try again in a minute`,
      };
    this.marksThisMinute++;
    this.log({ event: 'mark', note, by });
    return { ok: true };
  }

  /** Whole-string volts; the session refuses anything below the floor. */
  setCutoff(volts: number, by: string): { ok: true } | { ok: false; error: string } {
    if (this.ended) return { ok: false, error: 'the run has ended' };
    const r = this.session.setCutoff(volts);
    if (!r.ok) {
      this.log({ event: 'cutoff_refused', requested_V: volts, by, why: r.why });
      return { ok: false, error: r.why };
    }
    const cutoffV = this.session.cutoffV;
    this.log({
      event: 'cutoff_changed',
      cutoff_V: cutoffV,
      cutoff_V_per_cell: cutoffV / this.o.cfg.cells,
      by,
    });
    return { ok: true };
  }

  /**
   * A calibration edited mid-run applies from the next sample; the same one again changes
   * nothing. One `calibrate` would not write, or that would move the readings at the present
   * operating point too far (src/calibration/reload-check.ts), throws CV_CALIBRATION_INVALID
   * and the calibration in force stays.
   */
  useCalibration(next: Calibration, file: string): { old: string } | null {
    if (this.ended || next.id === this.pipeline.calibrationId) return null;
    const { chain } = this.o.cfg;
    const problem = reloadProblem(
      this.calibration,
      next,
      {
        fullScale: chain.fullScale(),
        voltsPerCount: chain.voltsPerCount,
        ampsPerCount: chain.ampsPerCount,
      },
      this.operatingPoint(),
    );
    if (problem !== null)
      throw makeError(
        ErrorCodes.CALIBRATION_INVALID,
        `the edited calibration was refused: ${problem}`,
        file,
        'Check the file (a fresh `cellvigil calibrate` writes a sound one); the calibration in force stays until a sound one is saved.',
      );
    const old = this.pipeline.calibrationId;
    this.pipeline.setCorrector(applyCalibration(next));
    this.calibration = next;
    this.log({ event: 'calibration_changed', old_id: old, new_id: next.id, file });
    return { old };
  }

  /**
   * New floor, temperature limit and default cutoff from an edited chemistry profile. It may
   * only tighten the limits in force when the run started (a higher floor or cutoff, a lower
   * temperature limit); one that would loosen any of them throws and the limits stay.
   */
  useChemistry(next: ChemistryProfile): { floorV: number; cutoffV: number } {
    const { cells, cutoff, floorV: startFloorV, maxTemperatureC: startMaxC } = this.o.cfg;
    const floorV = next.floor_V_per_cell.value * cells;
    const wanted = cutoff.fromUser ? cutoff.total : next.cutoff_V_per_cell.value * cells;
    const cutoffV = Math.max(wanted, floorV);
    const maxTemperatureC = next.max_temperature_C.value;
    const loosened = [
      floorV < startFloorV - 1e-9 &&
        `the floor ${floorV.toFixed(3)} V is below the ${startFloorV.toFixed(3)} V the run started with`,
      cutoffV < cutoff.total - 1e-9 &&
        `the cutoff ${cutoffV.toFixed(3)} V is below the ${cutoff.total.toFixed(3)} V the run started with`,
      maxTemperatureC > startMaxC &&
        `the temperature limit ${maxTemperatureC} °C is above the ${startMaxC} °C the run started with`,
    ].filter((x): x is string => typeof x === 'string');
    if (loosened.length > 0)
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        `a reload may tighten the limits in force at the start, never loosen them: ${loosened.join('; ')}`,
        `chemistry ${next.id}`,
        'Start a new run to discharge with looser limits; mid-run edits may only raise the floor or cutoff or lower the temperature limit.',
      );
    const r = this.session.updateLimits({ floorV, maxTemperatureC, cutoffV });
    if (!r.ok) throw new Error(r.why);
    return { floorV, cutoffV };
  }

  /** The last frame's nominal readings, for a reload's check; null before the first frame. */
  private operatingPoint(): OperatingPoint | null {
    const row = this.lastRow;
    if (row === null) return null;
    const { chain } = this.o.cfg;
    const celsius = chain.thermistorState(row.tRaw) === 'ok' ? chain.celsius(row.tRaw) : null;
    return {
      volts: chain.volts(row.vRaw),
      amps: chain.amps(row.iRaw),
      celsius,
      loadOn: (row.flags & FLAG_LOAD_ON) !== 0,
    };
  }

  /** A rig clock far off is worth a warning, once (the host clock times every frame anyway). */
  checkClock(): void {
    const ppm = this.pipeline.rigClockErrorPpm();
    if (this.clockWarned || ppm === null || Math.abs(ppm) <= CLOCK_WARN_PPM) return;
    this.clockWarned = true;
    const pct = (ppm / 1e4).toFixed(1);
    this.log({ event: 'clock_warning', rig_clock_error_ppm: Math.round(ppm) });
    this.o.status.line(
      `warning: the rig's clock runs ${pct} % ${ppm > 0 ? 'fast' : 'slow'} against the host's; cellvigil times every frame by the host clock, so figures are not affected.`,
    );
  }

  flush(): Promise<void> {
    return this.recorder.flush();
  }

  writeCheckpoint(): Promise<void> {
    return this.recorder.checkpoint(this.checkpoint());
  }

  /** Closes the recorder of a run that never got its rig. */
  abandon(): Promise<void> {
    this.ended = true;
    return this.recorder.abandon();
  }

  private sample(row: SampleRow, lost: number, gap: boolean, rigRestart: boolean): void {
    this.framesSeen++;
    if (this.unloggedPending) {
      this.unloggedPending = false;
      this.log(bridgeUnlogged(this.o.resume!, this.session.integrator, row));
    }
    if (this.resumeSeqPending) {
      this.resumeSeqPending = false;
      this.lostAcrossResume(row);
    }
    this.lastRow = row;
    this.recorder.sample(row);
    const loadOn = this.session.loadOn;
    if (loadOn) this.loadedSamples++;
    if (lost > 0) this.log({ event: 'frames_lost', count: lost, seq: row.seq });
    if (gap) {
      this.gaps++;
      this.log({
        event: 'gap',
        seq: row.seq,
        note: 'a long gap between frames; its charge is interpolated and counted as doubt in the uncertainty',
      });
    }
    if (rigRestart) this.log({ event: 'rig_restart', seq: row.seq, tick_ms: row.tickMs });
    this.o.status.update(row);
    for (const ob of this.observers) ob.sample?.(row, loadOn);
  }

  /** Frames the rig sent while the daemon was down: counted as lost (logged with the frame's own). */
  private lostAcrossResume(row: SampleRow): void {
    const { count, estimated } = framesLostAcrossResume(this.o.resume!.seq!, row);
    if (count === 0) return;
    this.pipeline.counters.lost += count;
    this.log({
      event: 'frames_lost',
      count,
      seq: row.seq,
      note: estimated
        ? 'across the resume; the rig restarted meanwhile, so estimated from the time down and the frame rate'
        : 'across the resume, from the sequence numbers',
    });
  }

  private dispatch(actions: Action[]): void {
    if (this.session instanceof ProgramSession) this.programOutputs(this.session);
    for (const a of actions) {
      if (this.ended) return;
      if (a.type === 'send') {
        const line = encodeCommand(a.command);
        const queued = this.o.send(line);
        if (a.command.command !== 'BEAT') this.log({ event: 'command', line: line.trim(), queued });
      } else if (a.type === 'event') {
        this.sessionEvent(a.name, a.detail);
      } else {
        void this.finish(a.reason, a.detail, a.loadOffConfirmed);
      }
    }
  }

  /** A program's 1.1 commands (through the rig's declared capabilities only) and ended segments. */
  private programOutputs(session: ProgramSession): void {
    for (const cmd of session.takeCommands()) {
      if (this.ended) break;
      const rig = this.pipeline.rig;
      let line: string;
      try {
        if (rig === null) throw new Error('no hello exchange yet');
        line = encodeForRig(rig, cmd);
      } catch (e) {
        this.log({
          event: 'command',
          line: `${cmd.command} refused: ${(e as Error).message}`,
          queued: false,
        });
        continue;
      }
      this.log({ event: 'command', line: line.trim(), queued: this.o.send(line) });
    }
    for (const seg of session.takeEndedSegments()) {
      try {
        appendSegment(this.o.folder, seg);
      } catch (e) {
        this.diskError(e as Error);
      }
    }
  }

  /** The session's events, typed by their kind; one the event table does not know is logged as it came. */
  private sessionEvent(name: string, detail: Record<string, unknown>): void {
    if (!isEventKind(name)) return this.recorder.foreign(name, detail);
    const ev = { event: name, ...detail } as RunEvent;
    this.log(ev);
    if (ev.event !== 'state') return;
    // A refusal's reason is printed once, as the run's error, after this line.
    const refused = ev.to === 'ended' && ev.why.startsWith('refused');
    this.o.status.line(`state: ${ev.from} -> ${ev.to} (${refused ? 'refused' : ev.why})`);
    const reason = this.session.result.reason;
    if (ev.to === 'stopping' && reason !== null && SAFETY_ENDS.has(reason))
      for (const ob of this.observers) ob.limitTripped?.(this.hostS(), reason, ev.why);
  }

  private diskError(e: Error): void {
    this.o.status.line(
      `cellvigil: ${ErrorCodes.RUN_FOLDER}: writing the run folder failed: ${e.message}. Switching the load off.`,
    );
    this.dispatch(this.session.requestStop(this.o.clock.now(), 'a failure writing the run folder'));
  }

  private checkpoint(): Checkpoint {
    const { session, pipeline, o } = this;
    const integ = session.integrator;
    return {
      host_s: Number(this.hostS().toFixed(3)),
      wall_time: new Date(o.clock.wallNow()).toISOString(),
      state: session.state,
      charge_Ah: integ.chargeAh,
      energy_Wh: integ.energyWh,
      load_on_s: integ.onMs / 1000,
      bridged_Ah: integ.bridgedAh,
      frames_accepted: pipeline.counters.accepted,
      frames_rejected: pipeline.counters.rejected,
      frames_lost: pipeline.counters.lost,
      rows_written: pipeline.counters.accepted,
      sample_file: this.recorder.sampleFile,
      cutoff_V: session.cutoffV,
      calibration_id: pipeline.calibrationId,
    };
  }

  private async finish(end: SessionEnd, detail: string, loadOffConfirmed: boolean): Promise<void> {
    if (this.ended) return;
    this.ended = true;
    try {
      await this.o.stopInputs();
      this.checkClock();
      const result = this.result(end, detail, loadOffConfirmed);
      this.recorder.ended({
        event: 'run_ended',
        end_reason: end,
        detail,
        load_off_confirmed: loadOffConfirmed,
      });
      await this.o.releaseLink();
      await this.recorder.close(() => this.checkpoint(), result);
      this.o.status.end();
      for (const ob of this.observers) ob.ended?.(result);
      const diskError = this.recorder.diskError;
      const rigNeverSpoke = this.framesSeen === 0;
      const exitCode = diskError ? 1 : exitCodeFor(end, rigNeverSpoke);
      this.settle({ exitCode, result, diskError, rigNeverSpoke });
    } catch (e) {
      this.fail(e);
    }
  }

  private result(end: SessionEnd, detail: string, loadOffConfirmed: boolean): RunResult {
    const { session, pipeline, o } = this;
    const { cfg } = o;
    const integ = session.integrator;
    // A program's figures are its cycles' (withProgram): nothing of the whole run is one capacity.
    const program = session instanceof ProgramSession ? session : null;
    const base = buildResult({
      end,
      detail,
      loadOffConfirmed,
      chargeAh: program ? 0 : integ.chargeAh,
      energyWh: program ? 0 : integ.energyWh,
      onMs: program ? 0 : integ.onMs,
      bridgedAh: program ? 0 : integ.bridgedAh,
      nominalAh: program ? 0 : pipeline.nominalAh,
      loadedSamples: program ? 0 : this.loadedSamples,
      lastLoadedV: session.lastLoadedV,
      cutoffV: session.cutoffV,
      counters: pipeline.counters,
      implausibleFrames: program
        ? program.implausibleCount
        : session.plausibility.implausibleFrames,
      rigClockErrorPpm: pipeline.rigClockErrorPpm(),
      calibration: this.calibration,
      calibrationId: pipeline.calibrationId,
      ampsPerCount: cfg.chain.ampsPerCount,
      voltsPerCount: cfg.chain.voltsPerCount,
      chemistry: cfg.chemistry.id,
      cells: cfg.cells,
      openCircuitV: session.openCircuitV,
      dcResistanceOhm: session.dcResistanceOhm,
      gaps: this.gaps,
      startedWallMs: o.startedWallMs,
      endedWallMs: o.clock.wallNow(),
      schedule: cfg.schedule ? describeSchedule(cfg.schedule) : null,
      cellId: cfg.cellId,
      loadSwitches: integ.switches,
    });
    return program ? withProgram(base, cfg.program!.plan.name, program.figures) : base;
  }
}

function newSession(o: ChannelRunOptions): Session {
  const { cfg } = o;
  const { chemistry, cells, cutoff } = cfg;
  return new Session({
    channel: o.channel,
    cutoffV: cutoff.total,
    floorV: cfg.floorV,
    maxTemperatureC: cfg.maxTemperatureC,
    maxCurrentA: cfg.maxCurrentA,
    linkTimeoutMs: o.linkTimeoutS * 1000,
    schedule: cfg.schedule,
    plausibility: plausibilityFor({
      maxRestVPerCell: chemistry.max_rest_V_per_cell.value,
      cells,
      ampsPerCount: cfg.chain.ampsPerCount,
    }),
    checkRest: (restV) => {
      const check = checkStartVoltage(
        chemistry,
        cells,
        restV,
        cutoff.perCell,
        cfg.chemistries,
        applyCalibration(cfg.calibration).voltage(cfg.chain.fullScale().volts),
      );
      return check.ok ? null : check.error.message;
    },
  });
}
