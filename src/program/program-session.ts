/**
 * A program run as a session: waiting (for the rig's capabilities) -> precheck (at rest) ->
 * running (the sequencer's segments) -> stopping (the channel to rest, confirmed by the frames)
 * -> ended. Pure and synchronous like the discharge session it stands in for: measurements and
 * time in; actions, 1.1 commands and ended segments out. Every frame of a segment goes through
 * the one accounting the recompute uses too; a frame that cannot be true is never integrated.
 */
import type { CellvigilError } from '../core/errors.js';
import type { RigCapabilities } from '../protocol/capabilities.js';
import { frameState, type FrameState } from '../protocol/frame-state.js';
import { FLAG_LOAD_ON, type HostCommand11 } from '../protocol/messages.js';
import type { SegmentFigures, SegmentLine } from './segment-figures.js';
import { Session, SESSION_TIMING, type SessionSettings } from '../session/session.js';
import type { Action, EndReason, Measurement, SessionState } from '../session/session-types.js';
import { CommandQueue } from './command-queue.js';
import { endOfProgram } from './program-end.js';
import type { Plan } from './program-types.js';
import { planRefusal } from './rig-needs.js';
import {
  emptyAccountedFrame,
  implausibleFrame,
  SegmentAccounting,
  type AccountedFrame,
  type AccountingSettings,
} from './segment-accounting.js';
import { SEGMENT_STATE, type Intent, type SequencerUpdate } from './sequence-types.js';
import { ProgramSequencer } from './sequencer.js';
import type { SequencerOptions } from './step-end.js';

export interface ProgramSessionSettings extends SessionSettings {
  plan: Plan;
  /** Host ms of the run's origin: segment times are whole ms from it, like the rows' host_s. */
  originMs: number;
  /** The load's setpoint in counts for `amps`: the profile and the calibration, inverted. */
  countsForAmps(amps: number): number;
  accounting: AccountingSettings;
  sequencer?: SequencerOptions;
}

type Phase = 'waiting' | 'precheck' | 'running' | 'stopping' | 'ended';

/** Implausible frames in a row that end a program (as a plain run ends on them). */
const IMPLAUSIBLE_END_FRAMES = 5;
const MAX_TRIES = 3;
/** A constant power's current setpoint follows the voltage this often, ms. */
const POWER_EVERY_MS = 5000;
/** Implausible frames listed one by one in the event log; the rest only counted. */
const LISTED_IN_FULL = 10;

export class ProgramSession extends Session {
  readonly accounting: SegmentAccounting;
  /** Figures of every segment ended so far, in order. */
  readonly figures: SegmentFigures[] = [];
  private readonly p: Required<
    Pick<
      SessionSettings,
      'precheckMs' | 'precheckFrames' | 'staleLinkMs' | 'linkTimeoutMs' | 'silentMs' | 'beatMs'
    >
  > & { confirmMs: number } & ProgramSessionSettings;
  private readonly seq: ProgramSequencer;
  private readonly commands: CommandQueue;
  private outbox: HostCommand11[] = [];
  private ended: SegmentLine[] = [];
  private phase: Phase = 'waiting';
  private kindState: SessionState = 'resting';
  private rig: RigCapabilities | null = null;
  private endReasonP: EndReason | null = null;
  private endDetailP = '';
  private startedMs = 0;
  private lastFrameMs: number | null = null;
  private linkDownAtMs: number | null = null;
  private linkUpAtMs = -Infinity;
  private lastBeatMs = -Infinity;
  private restAtMs = -Infinity;
  private restTries = 0;
  private lastMode: FrameState['mode'] | null = null;
  private restAvg: { sum: number; n: number; since: number } | null = null;
  private implausibleRun = 0;
  /** A frame of this run has shown a load or a charger on (see runFrame). */
  private outputOnSeen = false;
  private implausibleFrames = 0;
  /** The current setpoint last sent, counts, and when a constant power last re-set it. */
  private isetRaw: number | null = null;
  private powerAtMs = -Infinity;
  private readonly frameIn: AccountedFrame = emptyAccountedFrame();

  constructor(settings: ProgramSessionSettings) {
    super(settings);
    this.p = { ...SESSION_TIMING, ...settings };
    this.seq = new ProgramSequencer(settings.plan, settings.sequencer ?? {});
    // The rows' running totals are the segment's: the accounting integrates into the session's own.
    this.accounting = new SegmentAccounting(settings.accounting, this.integrator);
    this.commands = new CommandQueue(this.p.confirmMs, MAX_TRIES);
  }

  override get state(): SessionState {
    return this.phase === 'running' ? this.kindState : this.phase;
  }

  override get result(): { reason: EndReason | null; detail: string } {
    return { reason: this.endReasonP, detail: this.endDetailP };
  }

  /** Frames whose readings could not be true, left out of the integrals. */
  get implausibleCount(): number {
    return this.implausibleFrames;
  }

  /** The segment running now, or null. */
  get segment(): { index: number; kind: string; step: string; cycle: number | null } | null {
    return this.seq.current;
  }

  /** 1.1 commands to send, in order (the caller encodes them through the rig's capabilities). */
  takeCommands(): HostCommand11[] {
    const out = this.outbox;
    this.outbox = [];
    return out;
  }

  /** Segments ended since the last call, for segments.jsonl. */
  takeEndedSegments(): SegmentLine[] {
    const out = this.ended;
    this.ended = [];
    return out;
  }

  override begin(nowMs: number): Action[] {
    this.startedMs = nowMs;
    return super.begin(nowMs);
  }

  /** The hello exchange's answer: the program is checked against it before anything is switched on. */
  override capabilities(caps: RigCapabilities | CellvigilError): Action[] {
    const out: Action[] = [];
    if (caps instanceof Error) {
      out.push({
        type: 'event',
        name: 'rig_error',
        detail: { code: caps.code, text: caps.message },
      });
      if (this.phase === 'waiting') out.push({ type: 'send', command: { command: 'HELLO' } });
      return out;
    }
    this.rig = caps;
    if (this.phase !== 'waiting') return out;
    const refused = planRefusal(caps, this.p.plan, this.p.channel, (a) => this.p.countsForAmps(a));
    if (refused !== null) {
      const { error, step } = refused;
      this.endRun('refused', `${error.code}: ${error.message} [program step ${step}]`, true, out);
      return out;
    }
    this.moveTo('precheck', `the rig's channel ${this.p.channel} can run every step`, out);
    return out;
  }

  override frame(m: Measurement): Action[] {
    const out: Action[] = [];
    if (this.phase === 'ended') return out;
    this.lastFrameMs = m.hostMs;
    this.loadOn = (m.flags & FLAG_LOAD_ON) !== 0;
    const st = frameState(m.flags);
    this.lastMode = 'invalid' in st ? null : st.mode;
    if (this.phase === 'precheck') this.precheckFrame(m, st, out);
    else if (this.phase === 'running') this.runFrame(m, st, out);
    else if (this.phase === 'stopping' && this.lastMode === 'rest') this.finishStop(true, out);
    return out;
  }

  override ack(command: string, args: string[], nowMs?: number): Action[] {
    if (Number(args[0]) !== this.p.channel || nowMs === undefined) return [];
    if (this.phase === 'running') this.outbox.push(...this.commands.ack(command, args, nowMs));
    return [];
  }

  override linkDown(nowMs: number): Action[] {
    if (this.phase === 'ended' || this.linkDownAtMs !== null) return [];
    this.linkDownAtMs = nowMs;
    const detail = { state: this.state, waiting_s: this.p.linkTimeoutMs / 1000 };
    return [{ type: 'event', name: 'link_down', detail }];
  }

  override linkUp(nowMs: number): Action[] {
    if (this.phase === 'ended' || this.linkDownAtMs === null) return [];
    const downS = (nowMs - this.linkDownAtMs) / 1000;
    this.linkDownAtMs = null;
    this.linkUpAtMs = nowMs;
    return [
      { type: 'event', name: 'link_up', detail: { down_s: downS } },
      { type: 'send', command: { command: 'HELLO' } },
    ];
  }

  override tick(nowMs: number): Action[] {
    const out: Action[] = [];
    const ph = this.phase;
    if (ph === 'ended') return out;
    if (ph === 'waiting') {
      if (nowMs - this.startedMs > this.p.silentMs)
        this.endRun('refused', this.silentWhy(), true, out);
      return out;
    }
    if (this.stale(nowMs)) {
      if (ph === 'stopping') this.finishStop(false, out);
      else if (ph === 'precheck' && this.lastMode === 'rest')
        this.endRun('link_lost', 'no valid frame from the rig during the precheck', true, out);
      else this.halt('link_lost', this.staleWhy(), nowMs, out);
      return out;
    }
    if (ph === 'running') this.keepRunning(nowMs, out);
    if (ph === 'stopping' && nowMs - this.restAtMs >= this.p.confirmMs) {
      if (this.restTries >= MAX_TRIES) this.finishStop(false, out);
      else this.sendRest(nowMs);
    }
    return out;
  }

  override requestStop(nowMs: number, by: string): Action[] {
    const out: Action[] = [];
    const ph = this.phase;
    if (
      (ph === 'waiting' || ph === 'precheck') &&
      this.lastMode !== 'discharge' &&
      this.lastMode !== 'charge'
    )
      this.endRun('stopped', `stopped by ${by} before anything was switched on`, true, out);
    else if (ph === 'running' || ph === 'precheck')
      this.halt('stopped', `stopped by ${by}`, nowMs, out);
    return out;
  }

  /** An edited chemistry may only tighten the limits (the caller checks): the ceiling applies at once. */
  override updateLimits(x: {
    floorV: number;
    maxTemperatureC: number;
    cutoffV: number;
  }): { ok: true } | { ok: false; why: string } {
    const r = super.updateLimits(x);
    if (r.ok) this.p.maxTemperatureC = x.maxTemperatureC;
    return r;
  }

  override setCutoff(): { ok: false; why: string } {
    return {
      ok: false,
      why: "a program run takes each discharge's end-of-discharge voltage from its program; change it there for the next run",
    };
  }

  private silentWhy(): string {
    return this.rig === null && this.lastFrameMs !== null
      ? 'rig_silent: the rig sent frames but no hello exchange; ask it for a hello (C,HELLO) or check its firmware'
      : `rig_silent: no valid frame in ${this.p.silentMs / 1000} s`;
  }

  private staleWhy(): string {
    return this.linkDownAtMs !== null
      ? `the rig's port was gone for ${this.p.linkTimeoutMs / 1000} s; the rig's watchdog has switched its load and charger off`
      : `no valid frame for ${this.p.staleLinkMs / 1000} s`;
  }

  private stale(nowMs: number): boolean {
    if (this.lastFrameMs === null) return false;
    const since = Math.max(this.lastFrameMs, this.linkUpAtMs, this.linkDownAtMs ?? -Infinity);
    const limit = this.linkDownAtMs !== null ? this.p.linkTimeoutMs : this.p.staleLinkMs;
    return nowMs - since > limit;
  }

  private keepRunning(nowMs: number, out: Action[]): void {
    if (nowMs - this.lastBeatMs >= this.p.beatMs) {
      this.lastBeatMs = nowMs;
      out.push({ type: 'send', command: { command: 'BEAT' } });
    }
    const { resend, failed } = this.commands.tick(nowMs);
    this.outbox.push(...resend);
    if (failed !== null)
      this.halt(
        'fault',
        `command_not_acknowledged: the rig never acknowledged ${failed.command} after ${MAX_TRIES} tries`,
        nowMs,
        out,
      );
  }

  private precheckFrame(m: Measurement, st: FrameState | { invalid: string }, out: Action[]): void {
    if ('invalid' in st || st.mode !== 'rest') {
      this.restAvg = null;
      if (m.hostMs - this.restAtMs >= this.p.confirmMs) {
        out.push({
          type: 'event',
          name: 'load_found_on',
          detail: { action: 'setting the channel to rest before the precheck' },
        });
        this.sendRest(m.hostMs);
      }
      return;
    }
    const why = this.precheckRefusal(m);
    if (why !== null) return this.endRun('refused', why, true, out);
    this.restAvg ??= { sum: 0, n: 0, since: m.hostMs };
    this.restAvg.sum += m.volts;
    this.restAvg.n++;
    if (this.restAvg.n < this.p.precheckFrames || m.hostMs - this.restAvg.since < this.p.precheckMs)
      return;
    const restV = this.restAvg.sum / this.restAvg.n;
    this.openCircuitV = restV;
    const refusal = this.p.checkRest(restV);
    if (refusal !== null) return this.endRun('refused', refusal, true, out);
    out.push({
      type: 'event',
      name: 'precheck_passed',
      detail: { rest_V: restV, temperature_C: m.celsius },
    });
    this.moveTo('running', `precheck passed: program "${this.p.plan.name}" starts`, out);
    this.lastBeatMs = m.hostMs;
    out.push({ type: 'send', command: { command: 'BEAT' } });
    this.runFrame(m, st, out);
  }

  private precheckRefusal(m: Measurement): string | null {
    if (m.thermistor !== 'ok')
      return `thermistor_${m.thermistor}: the cell temperature cannot be read; check the NTC wiring`;
    if (m.celsius > this.p.maxTemperatureC)
      return `the cell is at ${m.celsius.toFixed(1)} °C, above the limit of ${this.p.maxTemperatureC} °C; let it cool`;
    return null;
  }

  private runFrame(m: Measurement, st: FrameState | { invalid: string }, out: Action[]): void {
    const f = this.frameIn;
    f.dtMs = m.dtMs;
    f.gap = m.gap;
    f.volts = m.volts;
    f.amps = m.amps;
    f.nominalA = m.nominalA ?? Math.abs(m.amps);
    f.flags = m.flags;
    if (this.accounting.isActive) this.accounting.add(f);
    const bad = implausibleFrame(f, this.p.accounting.maxVolts);
    if ('invalid' in st)
      return this.halt('fault', `rig_fault: ${bad ?? st.invalid}`, m.hostMs, out);
    // A rig keeps flag bit 1 from an earlier cut (a crashed host's run) until a host switches
    // something on again: it is this run's fault only once this run has had an output on.
    if (st.mode !== 'rest') this.outputOnSeen = true;
    if (st.rigFault && this.outputOnSeen)
      return this.halt('fault', 'rig_fault: the rig cut its outputs itself', m.hostMs, out);
    if (bad !== null) {
      if (++this.implausibleFrames <= LISTED_IN_FULL)
        out.push({
          type: 'event',
          name: 'implausible_reading',
          detail: {
            volts: Number.isFinite(m.volts) ? m.volts : null,
            amps: Number.isFinite(m.amps) ? m.amps : null,
            why: bad,
            count: this.implausibleFrames,
            note: 'not integrated; its time is bridged at the last trusted reading and counted as doubt',
          },
        });
      if (++this.implausibleRun >= IMPLAUSIBLE_END_FRAMES)
        this.halt('implausible_reading', bad, m.hostMs, out);
      return;
    }
    this.implausibleRun = 0;
    const hot = this.overTemperature(m);
    if (hot !== null) return this.halt(hot.reason, hot.detail, m.hostMs, out);
    if (st.mode !== 'rest') this.lastLoadedV = m.volts;
    const u = this.seq.onFrame({
      t_ms: this.runMs(m.hostMs),
      voltageV: m.volts,
      currentA: m.amps,
      temperatureC: m.thermistor === 'ok' ? m.celsius : null,
      mode: st.mode,
      setpointNotHeld: st.setpointNotHeld,
    });
    this.apply(u, m, out);
    if (this.phase === 'running') this.holdPower(m);
  }

  /**
   * A constant-power step on a load that holds a current: the setpoint follows the voltage,
   * re-set every few seconds when it has moved by a count or more (docs/protocol.md).
   */
  private holdPower(m: Measurement): void {
    const sp = this.seq.current?.setpoint;
    const watts = sp?.['load'] === 'constant_power' ? sp['power_W'] : null;
    if (typeof watts !== 'number' || m.hostMs - this.powerAtMs < POWER_EVERY_MS) return;
    if (this.commands.waiting > 0) return;
    this.powerAtMs = m.hostMs;
    const raw = this.p.countsForAmps(watts / Math.max(m.volts, 1e-3));
    if (raw === this.isetRaw) return;
    this.outbox.push(
      ...this.commands.push([{ command: 'ISET', channel: this.p.channel, raw }], m.hostMs),
    );
    this.isetRaw = raw;
  }

  /** The chemistry's temperature ceiling in every step; a thermistor gone outside a charge is a fault. */
  private overTemperature(m: Measurement): { reason: EndReason; detail: string } | null {
    const charging = this.seq.current?.kind === 'charge';
    if (m.thermistor !== 'ok')
      return charging
        ? null
        : {
            reason: 'fault',
            detail: `thermistor_${m.thermistor}: the cell temperature cannot be read`,
          };
    if (m.celsius > this.p.maxTemperatureC)
      return {
        reason: 'over_temperature',
        detail: `the cell reached ${m.celsius.toFixed(1)} °C, above the limit of ${this.p.maxTemperatureC} °C`,
      };
    return null;
  }

  private apply(u: SequencerUpdate, m: Measurement, out: Action[]): void {
    for (const rec of u.ended) this.closeSegment(rec as SegmentLine, out);
    if (u.started) {
      this.accounting.begin(this.frameIn);
      this.kindState = SEGMENT_STATE[u.started.kind];
      const { index, kind, step, cycle } = u.started;
      out.push({ type: 'event', name: 'segment_started', detail: { index, kind, step, cycle } });
    }
    if (u.finished) {
      const end = endOfProgram(u.finished, this.figures.at(-1) ?? null);
      return this.stopProgram(end.reason, end.detail, m.hostMs, out);
    }
    this.outbox.push(...this.commands.push(this.commandsFor(u.intents, m.volts), m.hostMs));
  }

  private closeSegment(rec: SegmentLine, out: Action[]): void {
    const fig = this.accounting.close(rec);
    this.figures.push(fig);
    this.ended.push(rec);
    out.push({
      type: 'event',
      name: 'segment_ended',
      detail: {
        index: rec.index,
        end_reason: rec.end_reason,
        charge_Ah: fig.charge_Ah,
        energy_Wh: fig.energy_Wh,
        duration_s: fig.duration_s,
      },
    });
  }

  /** The rig's commands for the sequencer's intents. */
  private commandsFor(intents: readonly Intent[], volts: number): HostCommand11[] {
    const channel = this.p.channel;
    const out: HostCommand11[] = [];
    for (const i of intents) {
      if (i.type === 'set-mode') out.push({ command: 'MODE', channel, mode: i.mode });
      else if (i.type === 'set-load' && i.load.type !== 'resistor') {
        const amps =
          i.load.type === 'constant_current' ? i.load.A : i.load.W / Math.max(volts, 1e-3);
        this.isetRaw = this.p.countsForAmps(amps);
        this.powerAtMs = -Infinity;
        out.push({ command: 'ISET', channel, raw: this.isetRaw });
      }
      // set-charge: the rig's charger holds its own current and voltage; the host holds the
      // plan's ceiling, window and timeout against the frames.
    }
    return out;
  }

  /** Ends the running segment and the program for a reason of the run's own, then stops. */
  private halt(reason: EndReason, detail: string, nowMs: number, out: Action[]): void {
    if (this.phase !== 'running') {
      if (this.phase === 'precheck') this.stopProgram(reason, detail, nowMs, out);
      return;
    }
    const u = this.seq.stop(this.runMs(nowMs));
    for (const rec of u.ended) this.closeSegment(rec as SegmentLine, out);
    this.stopProgram(reason, detail, nowMs, out);
  }

  private runMs(hostMs: number): number {
    return Math.round(hostMs - this.p.originMs);
  }

  private stopProgram(reason: EndReason, detail: string, nowMs: number, out: Action[]): void {
    this.endReasonP = reason;
    this.endDetailP = detail;
    this.moveTo('stopping', `${reason}: ${detail}`, out);
    this.commands.clear();
    this.restTries = 0;
    // No heartbeat from here on: if MODE R is lost, the rig's watchdog still switches everything off.
    this.sendRest(nowMs);
  }

  private sendRest(nowMs: number): void {
    this.restAtMs = nowMs;
    this.restTries++;
    if (this.rig?.protocol === '1.1')
      this.outbox.push({ command: 'MODE', channel: this.p.channel, mode: 'rest' });
  }

  private finishStop(confirmed: boolean, out: Action[]): void {
    if (!confirmed)
      out.push({
        type: 'event',
        name: 'load_off_unconfirmed',
        detail: {
          note: 'no frame at rest came; heartbeats stopped so the rig watchdog switches everything off within 5 s',
        },
      });
    this.endRun(this.endReasonP ?? 'stopped', this.endDetailP, confirmed, out);
  }

  private endRun(
    reason: EndReason | 'refused',
    detail: string,
    offConfirmed: boolean,
    out: Action[],
  ): void {
    if (reason !== 'refused') this.endReasonP = reason;
    this.endDetailP = detail;
    this.moveTo('ended', `${reason}: ${detail}`, out);
    out.push({ type: 'end', reason, detail, loadOffConfirmed: offConfirmed });
  }

  private moveTo(next: Phase, why: string, out: Action[]): void {
    const from = this.state;
    this.phase = next;
    out.push({ type: 'event', name: 'state', detail: { from, to: this.state, why } });
  }
}
