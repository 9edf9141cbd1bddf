import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import type { RigCapabilities } from '../protocol/capabilities.js';
import { FLAG_LOAD_ON, FLAG_RIG_FAULT } from '../protocol/messages.js';
import { loadPlanAt, type Schedule } from '../schedule/schedule.js';
import { Integrator } from './integrator.js';
import { Limits, type LimitSettings } from './limits.js';
import { Plausibility, type PlausibilitySettings } from './plausibility.js';
import type { Action, EndReason, Measurement, SessionEnd, SessionState } from './session-types.js';

export interface SessionSettings extends LimitSettings {
  channel: number;
  /** Lowest cutoff of the whole string that anyone may set (the chemistry's floor × cells). */
  floorV: number;
  /** Returns why a resting voltage must not be discharged, or null when it may. */
  checkRest: (restV: number) => string | null;
  /** @default 1000 */
  precheckMs?: number;
  /** @default 5 */
  precheckFrames?: number;
  /** No valid frame for this long, the port still open, ends the run as link_lost. @default 3000 */
  staleLinkMs?: number;
  /** The port gone (unplugged) this long ends the run as link_lost. @default 60000 */
  linkTimeoutMs?: number;
  /** No valid frame at all this long after start: the rig is silent. @default 5000 */
  silentMs?: number;
  /** Heartbeat period while the load may be on; the protocol asks for at least one a second. @default 500 */
  beatMs?: number;
  /** How long to wait for a LOAD command to be confirmed before repeating it. @default 1000 */
  confirmMs?: number;
  /** When the load is on, as a function of time since the discharge started; continuous when absent. */
  schedule?: Schedule | null;
  /** What the chemistry × cells and the rig allow a reading to be (`plausibilityFor`). */
  plausibility: PlausibilitySettings;
}

type PlausibleEnd = { reason: 'implausible_reading' | 'open_load'; detail: string };

/** Volts compared with a floor get this slack, so that 3 × 0.9 V is not refused as below 2.7000000000000002. */
const FLOOR_SLACK_V = 1e-9;

/** The precheck's and the link's timing, ms, unless the settings say otherwise. */
export const SESSION_TIMING = {
  precheckMs: 1000,
  precheckFrames: 5,
  staleLinkMs: 3000,
  linkTimeoutMs: 60_000,
  silentMs: 5000,
  beatMs: 500,
  confirmMs: 1000,
} as const;

/**
 * The discharge as an explicit state machine: waiting -> precheck -> starting -> discharging
 * -> stopping -> ended. Pure and synchronous: measurements and time in, actions out. Safety
 * limits are checked in one place (Limits) and every transition is an event with its reason.
 */
export class Session {
  readonly integrator = new Integrator();
  readonly plausibility: Plausibility;
  /** The frame's readings as the plausibility check takes them, filled in place per frame. */
  private readonly plausibleIn = { atMs: 0, volts: 0, amps: 0, loadOn: false };
  private plausibleEnd: PlausibleEnd | null = null;
  private readonly limits: Limits;
  private readonly s: Required<Omit<SessionSettings, keyof LimitSettings>> & SessionSettings;
  private stateValue: SessionState = 'waiting';
  private startedAt: number | null = null;
  private lastFrameAt: number | null = null;
  private lastBeatAt = -Infinity;
  private commandAt = -Infinity;
  private commandTries = 0;
  private rest: { sum: number; n: number; since: number } | null = null;
  private endReason: EndReason | null = null;
  private endDetail = '';
  private unexpectedOff = 0;
  /** Set while the port is gone; the time it went. */
  private linkDownAt: number | null = null;
  /** The time the port came back; staleness counts from here too. */
  private linkUpAt = -Infinity;
  /** After an interruption the first frame's load flag is read before anything else. */
  private reread = false;
  /** What the schedule wants the load to be, and since when (continuous: always on). */
  private wantOn = true;
  private switchAt = -Infinity;
  private switchTries = 0;
  private scheduleStartMs: number | null = null;
  /** Resting voltage measured before the load went on. */
  openCircuitV: number | null = null;
  /** (U_open − U_load) / I_load from the first loaded frame. */
  dcResistanceOhm: number | null = null;
  /** Last voltage read with the load on. */
  lastLoadedV: number | null = null;
  loadOn = false;

  constructor(settings: SessionSettings) {
    this.s = { ...SESSION_TIMING, schedule: null, ...settings };
    // The floor holds whoever builds the session, not only for changes made while it runs.
    if (!(settings.cutoffV >= settings.floorV - FLOOR_SLACK_V))
      throw makeError(
        ErrorCodes.CUTOFF_BELOW_FLOOR,
        `cutoff ${settings.cutoffV} V is below the safety floor of ${settings.floorV.toFixed(3)} V`,
        'session settings: cutoffV',
        'Choose a cutoff at or above the floor; the floor cannot be lowered.',
      );
    this.limits = new Limits(settings);
    this.plausibility = new Plausibility(settings.plausibility);
  }

  get state(): SessionState {
    return this.stateValue;
  }

  get cutoffV(): number {
    return this.limits.cutoffVolts;
  }

  /** Starts the clock for "rig silent"; call once when the source is open. */
  begin(nowMs: number): Action[] {
    this.startedAt = nowMs;
    return [{ type: 'send', command: { command: 'HELLO' } }];
  }

  /**
   * The rig's capabilities from its hello exchange: a plain discharge reads v1 flags either
   * way and needs nothing from them (a program run does).
   */
  capabilities(_caps: RigCapabilities | CellvigilError): Action[] {
    return [];
  }

  frame(m: Measurement): Action[] {
    const out: Action[] = [];
    if (this.stateValue === 'ended') return out;
    this.lastFrameAt = m.hostMs;
    this.loadOn = (m.flags & FLAG_LOAD_ON) !== 0;
    // After a long gap (a stalled link, a suspended host) the load flag is read afresh too.
    if (this.reread || m.gap) this.afterInterruption(out);
    const plausible = this.screen(m, out);
    switch (this.stateValue) {
      case 'waiting':
        this.to('precheck', 'first valid frame from the rig', out);
        this.precheck(m, out);
        break;
      case 'precheck':
        this.precheck(m, out);
        break;
      case 'starting':
        if (this.loadOn) this.confirmOn(m, out);
        else this.checkLimits(m, out, plausible);
        break;
      case 'discharging':
        this.checkLimits(m, out, plausible);
        break;
      case 'stopping':
        if (!this.loadOn) this.finish(true, out);
        break;
    }
    return out;
  }

  /** The port went away (unplugged): wait up to linkTimeoutMs for it to return. */
  linkDown(nowMs: number): Action[] {
    if (this.stateValue === 'ended' || this.linkDownAt !== null) return [];
    this.linkDownAt = nowMs;
    return [
      {
        type: 'event',
        name: 'link_down',
        detail: { state: this.stateValue, waiting_s: this.s.linkTimeoutMs / 1000 },
      },
    ];
  }

  /** The port is back: the next frame's load flag decides what happens. */
  linkUp(nowMs: number): Action[] {
    if (this.stateValue === 'ended' || this.linkDownAt === null) return [];
    const downS = (nowMs - this.linkDownAt) / 1000;
    this.linkDownAt = null;
    this.linkUpAt = nowMs;
    this.reread = true;
    return [
      { type: 'event', name: 'link_up', detail: { down_s: downS } },
      { type: 'send', command: { command: 'HELLO' } },
    ];
  }

  /**
   * Continues a run from totals recorded earlier (resuming after the daemon died). The
   * precheck runs again before the load goes back on.
   */
  restore(totals: { chargeAh: number; energyWh: number; onMs: number; bridgedAh: number }): void {
    this.integrator.restore(totals);
  }

  /**
   * An acknowledgement from the rig (`A,LOAD,<ch>,<0|1>`), arrived at host ms `nowMs`: a load
   * switched off since the last frame went off before then (for the uncertainty budget).
   */
  ack(command: string, args: string[], nowMs?: number): Action[] {
    const out: Action[] = [];
    // A LOAD 1 is confirmed by the next frame instead, which also gives the loaded voltage.
    if (
      command === 'LOAD' &&
      Number(args[0]) === this.s.channel &&
      args[1] === '0' &&
      this.stateValue === 'stopping'
    ) {
      if (nowMs !== undefined && this.lastFrameAt !== null)
        this.integrator.offAfterLast(nowMs - this.lastFrameAt);
      this.finish(true, out);
    }
    return out;
  }

  tick(nowMs: number): Action[] {
    const out: Action[] = [];
    const st = this.stateValue;
    if (st === 'ended') return out;
    if (st === 'waiting') {
      if (this.startedAt !== null && nowMs - this.startedAt > this.s.silentMs)
        this.end('refused', `rig_silent: no valid frame in ${this.s.silentMs / 1000} s`, true, out);
      return out;
    }
    const lastSign = Math.max(
      this.lastFrameAt ?? -Infinity,
      this.linkUpAt,
      this.linkDownAt ?? -Infinity,
    );
    const down = this.linkDownAt !== null;
    const stale =
      this.lastFrameAt !== null &&
      nowMs - lastSign > (down ? this.s.linkTimeoutMs : this.s.staleLinkMs);
    if (down && st !== 'stopping' && !stale) return out;
    if (stale && down && st !== 'stopping') {
      if (this.integrator.bridgeToCut())
        this.bridgedCut(
          "the port went away with the load on and did not return: the last current until the rig's watchdog cut it, about 4.75 s (± 0.25 s) after the last frame",
          out,
        );
      if (st === 'precheck' && !this.loadOn) {
        this.end(
          'link_lost',
          `the rig's port was gone for ${this.s.linkTimeoutMs / 1000} s during the precheck`,
          true,
          out,
        );
        return out;
      }
      this.beginStop(
        'link_lost',
        `the rig's port was gone for ${this.s.linkTimeoutMs / 1000} s; LOAD 0 is sent if it returns, and the rig's own watchdog has cut the load`,
        nowMs,
        out,
      );
      return out;
    }
    if (stale && st !== 'stopping') {
      if (st === 'precheck' && !this.loadOn) {
        this.end(
          'link_lost',
          `no valid frame for ${this.s.staleLinkMs / 1000} s during the precheck`,
          true,
          out,
        );
        return out;
      }
      this.beginStop('link_lost', `no valid frame for ${this.s.staleLinkMs / 1000} s`, nowMs, out);
      return out;
    }
    if ((st === 'starting' || st === 'discharging') && nowMs - this.lastBeatAt >= this.s.beatMs) {
      this.lastBeatAt = nowMs;
      out.push({ type: 'send', command: { command: 'BEAT' } });
    }
    if (st === 'discharging' && this.s.schedule) this.followSchedule(this.s.schedule, nowMs, out);
    if ((st === 'starting' || st === 'stopping') && nowMs - this.commandAt >= this.s.confirmMs) {
      if (this.commandTries >= 3 || (st === 'stopping' && stale)) {
        if (st === 'starting')
          this.beginStop(
            'fault',
            'load_not_confirmed: the rig never reported the load on',
            nowMs,
            out,
          );
        else this.finish(false, out);
      } else {
        this.commandTries++;
        this.commandAt = nowMs;
        out.push(this.loadCommand(st === 'starting'));
      }
    }
    return out;
  }

  /** A stop asked for by the user (signal, live control). */
  requestStop(nowMs: number, by: string): Action[] {
    const out: Action[] = [];
    const st = this.stateValue;
    // A load found on during the precheck is switched off and confirmed like any other.
    if ((st === 'waiting' || st === 'precheck') && !this.loadOn)
      this.end('stopped', `stopped by ${by} before the load was switched on`, true, out);
    else if (st !== 'stopping' && st !== 'ended')
      this.beginStop('stopped', `stopped by ${by}`, nowMs, out);
    return out;
  }

  /** Changes the cutoff (whole string, V); refuses anything below the floor. */
  setCutoff(volts: number): { ok: true } | { ok: false; why: string } {
    if (!Number.isFinite(volts) || volts < this.s.floorV - FLOOR_SLACK_V)
      return {
        ok: false,
        why: `cutoff ${volts} V is below the safety floor of ${this.s.floorV.toFixed(3)} V`,
      };
    this.limits.setCutoff(volts);
    return { ok: true };
  }

  /**
   * New limits from an edited chemistry file: the floor, the temperature limit and the cutoff
   * (which the caller has already raised to the floor if needed).
   */
  updateLimits(x: {
    floorV: number;
    maxTemperatureC: number;
    cutoffV: number;
  }): { ok: true } | { ok: false; why: string } {
    if (!(x.cutoffV >= x.floorV - FLOOR_SLACK_V))
      return { ok: false, why: `cutoff ${x.cutoffV} V is below the floor ${x.floorV} V` };
    this.s.floorV = x.floorV;
    this.s.maxTemperatureC = x.maxTemperatureC;
    this.limits.setFloor(x.floorV);
    this.limits.setMaxTemperature(x.maxTemperatureC);
    this.limits.setCutoff(x.cutoffV);
    return { ok: true };
  }

  get result(): { reason: EndReason | null; detail: string } {
    return { reason: this.endReason, detail: this.endDetail };
  }

  private precheck(m: Measurement, out: Action[]): void {
    if (this.loadOn) {
      this.rest = null;
      if (m.hostMs - this.commandAt >= this.s.confirmMs) {
        this.commandAt = m.hostMs;
        out.push({
          type: 'event',
          name: 'load_found_on',
          detail: { action: 'switching it off before the precheck' },
        });
        out.push(this.loadCommand(false));
      }
      return;
    }
    if (m.thermistor !== 'ok') {
      this.end(
        'refused',
        `thermistor_${m.thermistor}: the cell temperature cannot be read; check the NTC wiring`,
        true,
        out,
      );
      return;
    }
    if (m.celsius > this.s.maxTemperatureC) {
      this.end(
        'refused',
        `the cell is at ${m.celsius.toFixed(1)} °C, above the limit of ${this.s.maxTemperatureC} °C; let it cool`,
        true,
        out,
      );
      return;
    }
    if (this.rest === null) this.rest = { sum: 0, n: 0, since: m.hostMs };
    this.rest.sum += m.volts;
    this.rest.n++;
    if (this.rest.n < this.s.precheckFrames || m.hostMs - this.rest.since < this.s.precheckMs)
      return;
    const restV = this.rest.sum / this.rest.n;
    this.openCircuitV = restV;
    const refusal = this.s.checkRest(restV);
    if (refusal !== null) {
      this.end('refused', refusal, true, out);
      return;
    }
    out.push({
      type: 'event',
      name: 'precheck_passed',
      detail: { rest_V: restV, temperature_C: m.celsius },
    });
    const sched = this.s.schedule;
    if (sched) {
      this.scheduleStartMs ??= m.hostMs;
      const plan = loadPlanAt(sched, m.hostMs - this.scheduleStartMs);
      if (!plan.on) {
        this.wantOn = false;
        this.switchAt = m.hostMs;
        this.lastBeatAt = m.hostMs;
        this.to('discharging', 'precheck passed: the schedule starts with the load off', out);
        return;
      }
    }
    this.to('starting', 'precheck passed: switching the load on', out);
    this.commandAt = m.hostMs;
    this.commandTries = 0;
    this.lastBeatAt = m.hostMs;
    out.push({ type: 'send', command: { command: 'BEAT' } }, this.loadCommand(true));
  }

  /** Switches the load as the schedule says, and makes sure the rig followed. */
  private followSchedule(sched: Schedule, nowMs: number, out: Action[]): void {
    const plan = loadPlanAt(sched, nowMs - (this.scheduleStartMs ?? nowMs));
    if (plan.finished) {
      this.beginStop('stopped', 'schedule_finished: the schedule ran its course', nowMs, out);
      return;
    }
    if (plan.on !== this.wantOn) {
      this.wantOn = plan.on;
      this.switchAt = nowMs;
      this.switchTries = 0;
      this.unexpectedOff = 0;
      out.push(
        { type: 'event', name: 'schedule_switch', detail: { load_on: plan.on } },
        this.loadCommand(plan.on),
      );
      return;
    }
    if (
      this.loadOn !== this.wantOn &&
      nowMs - this.switchAt >= this.s.confirmMs * (this.switchTries + 1)
    ) {
      if (this.switchTries >= 3) {
        this.beginStop(
          'fault',
          `load_not_confirmed: the rig did not switch the load ${this.wantOn ? 'on' : 'off'} as the schedule asked`,
          nowMs,
          out,
        );
        return;
      }
      this.switchTries++;
      out.push(this.loadCommand(this.wantOn));
    }
  }

  /** First frame after the port came back: the load flag says what the rig did meanwhile. */
  private afterInterruption(out: Action[]): void {
    this.reread = false;
    const st = this.stateValue;
    if (st !== 'starting' && st !== 'discharging') return;
    if (this.loadOn) {
      out.push({
        type: 'event',
        name: 'load_still_on',
        detail: { note: 'the load stayed on through the interruption' },
      });
      return;
    }
    // The rig's watchdog cut the load; that time was rest. Check the cell again before switching on.
    this.rest = null;
    this.unexpectedOff = 0;
    this.to(
      'precheck',
      'the rig cut the load while the link was down; checking the resting voltage before switching it on again',
      out,
    );
  }

  private confirmOn(m: Measurement, out: Action[]): void {
    if (this.openCircuitV !== null && m.amps > 0) {
      this.dcResistanceOhm = (this.openCircuitV - m.volts) / m.amps;
    }
    this.wantOn = true;
    this.switchAt = m.hostMs;
    this.to('discharging', 'the rig reports the load on', out);
    out.push({
      type: 'event',
      name: 'load_on',
      detail: {
        open_circuit_V: this.openCircuitV,
        loaded_V: m.volts,
        current_A: m.amps,
        dc_resistance_ohm: this.dcResistanceOhm,
      },
    });
  }

  /**
   * Integrates the frame unless its readings cannot be true; the time of a frame left out is
   * bridged at the last trusted reading and counted as doubt. Returns whether it was trusted;
   * an end the plausibility check asks for waits in `plausibleEnd` for the limits.
   */
  private screen(m: Measurement, out: Action[]): boolean {
    const st = this.stateValue;
    let ok = true;
    this.plausibleEnd = null;
    if (!this.loadOn) this.plausibility.observeOff(m.amps);
    if (st === 'starting' || st === 'discharging' || st === 'stopping') {
      const x = this.plausibleIn;
      x.atMs = m.hostMs;
      x.volts = m.volts;
      x.amps = m.amps;
      x.loadOn = this.loadOn;
      const p = this.plausibility.check(x);
      for (let i = 0; i < p.events.length; i++) {
        const e = p.events[i]!;
        out.push({ type: 'event', name: e.name, detail: e.detail });
      }
      ok = p.plausible;
      this.plausibleEnd = p.end;
    }
    if (!ok) {
      this.integrator.hold(m.dtMs, this.loadOn);
      return false;
    }
    if (this.integrator.add(m.dtMs, m.volts, m.amps, this.loadOn, m.gap))
      this.bridgedCut(
        "the load was on before a long gap and off after it: the last current until the rig's watchdog cut it, about 4.75 s (± 0.25 s) after the last frame, or the whole gap if shorter",
        out,
      );
    if (this.loadOn) this.lastLoadedV = m.volts;
    return true;
  }

  /** The charge the integrator bridged to a watchdog cut, as an event (counted in full as doubt). */
  private bridgedCut(basis: string, out: Action[]): void {
    const { ms, chargeAh } = this.integrator.cut;
    out.push({
      type: 'event',
      name: 'unlogged_discharge',
      detail: { estimated_s: ms / 1000, charge_Ah: chargeAh, basis },
    });
  }

  private checkLimits(m: Measurement, out: Action[], plausible: boolean): void {
    const trip = this.limits.check({
      atMs: m.hostMs,
      volts: m.volts,
      amps: m.amps,
      celsius: m.celsius,
      thermistor: m.thermistor,
      loadOn: this.loadOn,
      rigFault: this.stateValue === 'discharging' && (m.flags & FLAG_RIG_FAULT) !== 0,
      readingsPlausible: plausible,
    });
    if (trip) {
      this.beginStop(trip.reason, trip.detail, m.hostMs, out);
      return;
    }
    const end = this.plausibleEnd;
    if (end && this.stateValue === 'discharging') {
      this.beginStop(end.reason, end.detail, m.hostMs, out);
      return;
    }
    // Off because the schedule said so, or still switching: not a fault.
    if (
      this.stateValue === 'discharging' &&
      this.wantOn &&
      m.hostMs - this.switchAt > this.s.confirmMs
    ) {
      this.unexpectedOff = this.loadOn ? 0 : this.unexpectedOff + 1;
      if (this.unexpectedOff >= 3)
        this.beginStop(
          'fault',
          'load_dropped: the rig reports the load off without a command',
          m.hostMs,
          out,
        );
    }
  }

  private beginStop(reason: EndReason, detail: string, nowMs: number, out: Action[]): void {
    this.endReason = reason;
    this.endDetail = detail;
    this.to('stopping', `${reason}: ${detail}`, out);
    this.commandAt = nowMs;
    this.commandTries = 0;
    // No heartbeat from here on: if the LOAD 0 is lost, the rig's own watchdog still cuts the load.
    out.push(this.loadCommand(false));
  }

  private finish(confirmed: boolean, out: Action[]): void {
    if (!confirmed)
      out.push({
        type: 'event',
        name: 'load_off_unconfirmed',
        detail: {
          note: 'no confirmation; heartbeats stopped so the rig watchdog cuts the load within 5 s',
        },
      });
    this.end(this.endReason ?? 'stopped', this.endDetail, confirmed, out);
  }

  private end(reason: SessionEnd, detail: string, loadOffConfirmed: boolean, out: Action[]): void {
    if (reason !== 'refused') this.endReason = reason;
    this.endDetail = detail;
    this.to('ended', `${reason}: ${detail}`, out);
    out.push({ type: 'end', reason, detail, loadOffConfirmed });
  }

  private to(next: SessionState, why: string, out: Action[]): void {
    out.push({ type: 'event', name: 'state', detail: { from: this.stateValue, to: next, why } });
    this.stateValue = next;
  }

  private loadCommand(on: boolean): Action {
    return { type: 'send', command: { command: 'LOAD', channel: this.s.channel, on } };
  }
}
