import type { RigProfile } from '../chain/rig-profile-types.js';
import type { Clock, TimerHandle } from '../core/clock.js';
import { decodeHostLine, encodeDataFrame, frameLine, MAX_LINE_LENGTH } from '../protocol/codec.js';
import { decodeHostLine11, encodeCapability } from '../protocol/codec11.js';
import type { ChannelMode, HostCommand, HostCommand11 } from '../protocol/messages.js';
import { decide11 } from './commands11.js';
import { FaultInjector, NO_FAULTS, type FaultOptions } from './faults.js';
import { mulberry32 } from './prng.js';
import { RigTickCounter } from './rig-clock.js';
import type { ChargePhase } from './regulators.js';
import {
  SimChannel,
  type LoadSwitch,
  type ModeSwitch,
  type SimChannelOptions,
} from './sim-channel.js';

export type { LoadSwitch, ModeSwitch } from './sim-channel.js';

/** Protocol v1: a rig that hears no heartbeat for this long while a load is on cuts every load. */
export const WATCHDOG_MS = 5000;

/** What belongs to the rig as a whole: its link, clock, identity and line faults. */
export interface SimRigBase {
  clock: Clock;
  profile: RigProfile;
  /** Rate error of the rig's oscillator: +0.12 counts 12 % fast. */
  clockError: number;
  /** Tick counter value at boot (a real rig boots at 0; a high start exercises the 2^32 wrap). */
  startTick?: number;
  /** Frame period in rig milliseconds; 100 if omitted. */
  framePeriodMs?: number;
  rigId: string;
  firmware: string;
  faults?: FaultOptions;
  /** Seed of the noise and fault generator; the same seed gives the same run. */
  seed?: number;
}

/** A one-channel rig, its channel's parts given inline. */
export interface SimRigOptions extends SimRigBase, Omit<SimChannelOptions, 'channel'> {
  /** The one channel this rig has; 0 if omitted. */
  channel?: number;
}

/** A rig with several channels, each with its own cell, load and front end. */
export interface SimMultiRigOptions extends SimRigBase {
  channels: SimChannelOptions[];
}

/** True state of the simulated rig and cell, and totals since `start`. */
export interface SimTruth {
  elapsedS: number;
  chargeAh: number;
  energyWh: number;
  loadOnS: number;
  stateOfCharge: number;
  openCircuitV: number;
  terminalV: number;
  /** Positive out of the cell (discharging), negative into it (charging). */
  currentA: number;
  temperatureC: number;
  loadOn: boolean;
  rigFault: boolean;
  framesSent: number;
  framesDropped: number;
  garbageLines: number;
}

/** What a protocol 1.1 channel adds to its truth. */
export interface SimTruth11 {
  mode: ChannelMode;
  chargePhase: ChargePhase | 'off';
  /** Charge put into the cell since the start, amp-hours. */
  chargedAh: number;
  /** The true current the constant-current load is set to draw, amps (0 without a setpoint). */
  targetA: number;
  setpointRaw: number;
  /** The load cannot hold its setpoint now (flag bit 5). */
  setpointNotHeld: boolean;
  /** The cell's polarisation volts now. */
  overpotentialV: number;
}

/**
 * Physics step: far below the cell's electrical and thermal time constants (seconds and up),
 * and the rig steps to every command and frame instant as well, so switches land exactly.
 */
const PHYSICS_STEP_MS = 10;

/**
 * A simulated rig speaking protocol v1, with a cell on each channel's load. Every frame period
 * it converts its channels in order and sends one data frame each, with a sequence number per
 * channel. Replies: LOAD → `A,LOAD,<ch>,<0|1>`; HELLO → a hello line with the channel count;
 * BEAT → nothing (a reply once a second would only double the traffic; the watchdog is the
 * rig's whole use of it); anything else → `E,<code>,<text>` with code CRC, SYNTAX, RANGE,
 * CHANNEL or OVERLONG. The watchdog is the rig's, not a channel's: it counts true time from the
 * later of the last BEAT and a load switching on, and when it runs out it cuts every load.
 *
 * A rig with a channel that has a constant-current load or a charger speaks protocol 1.1
 * instead (docs/protocol.md, "Version 1.1"): K lines after every hello, ISET, PSET and MODE
 * answered as commands11.ts decides, a frame at once after every mode change, flags bits 2–5,
 * and a watchdog over chargers too that says E,BEAT_LOST when it cuts.
 */
export class SimRig {
  private readonly clock: Clock;
  private readonly ticks: RigTickCounter;
  private readonly faults: FaultInjector;
  private readonly channels: SimChannel[];
  private readonly byNumber = new Map<number, SimChannel>();
  private readonly framePeriodMs: number;
  private readonly base: SimRigBase;
  /** A channel declares a constant-current load or a charger: the rig speaks protocol 1.1. */
  readonly speaks11: boolean;

  private write: ((chunk: string) => void) | null = null;
  private stopped = false;
  private bootAt = 0;
  private physicsAt = 0;
  private pending: string[] = [];
  private pendingFrames = 0;
  private inbox = '';
  private discarding = false;
  private frameTimer: TimerHandle | null = null;
  private watchdogTimer: TimerHandle | null = null;

  constructor(opts: SimRigOptions | SimMultiRigOptions) {
    this.base = opts;
    this.clock = opts.clock;
    this.framePeriodMs = opts.framePeriodMs ?? 100;
    if (!(this.framePeriodMs > 0))
      throw new RangeError(`frame period must be positive, got ${this.framePeriodMs} ms`);
    if (
      !/^[\x21-\x7e]+$/.test(opts.rigId + opts.firmware) ||
      /[,|]/.test(opts.rigId + opts.firmware)
    ) {
      throw new RangeError('rig id and firmware must be printable, without spaces, commas or "|"');
    }
    const specs = 'channels' in opts ? opts.channels : [{ ...opts, channel: opts.channel ?? 0 }];
    if (specs.length < 1 || specs.length > 16)
      throw new RangeError(`a rig has 1 to 16 channels, got ${specs.length}`);
    // One generator for the whole rig, drawn in channel order: the same seed gives the same bytes.
    const rng = mulberry32(opts.seed ?? 1);
    this.channels = specs.map((c) => new SimChannel(c, opts.profile, rng));
    for (const c of this.channels) {
      if (this.byNumber.has(c.channel)) throw new RangeError(`channel ${c.channel} given twice`);
      this.byNumber.set(c.channel, c);
    }
    this.speaks11 = this.channels.some((c) => c.capability !== null);
    this.ticks = new RigTickCounter(opts.clockError, opts.startTick ?? 0);
    this.faults = new FaultInjector(opts.faults ?? NO_FAULTS, rng);
  }

  /** The channel numbers this rig has, in frame order. */
  get channelNumbers(): number[] {
    return this.channels.map((c) => c.channel);
  }

  /** Powers the rig up: a hello at once, then a data frame per channel every frame period. */
  start(write: (chunk: string) => void): void {
    if (this.write || this.stopped) throw new Error('a SimRig starts once');
    this.write = write;
    this.bootAt = this.clock.now();
    this.physicsAt = this.bootAt;
    this.sendHello();
    this.frameTimer = this.clock.setTimer(
      () => this.onFrame(),
      this.ticks.trueMsFor(this.framePeriodMs),
      true,
    );
  }

  /** Bytes from the host; lines may arrive split or several at once. */
  receive(text: string): void {
    if (!this.write || this.stopped) return;
    this.catchUp();
    this.inbox += text;
    for (;;) {
      const nl = this.inbox.indexOf('\n');
      if (nl < 0) break;
      const line = this.inbox.slice(0, nl);
      this.inbox = this.inbox.slice(nl + 1);
      if (this.discarding) {
        this.discarding = false;
        this.send(frameLine('E,OVERLONG,line too long'), true);
      } else {
        this.onLine(line);
      }
    }
    // A firmware line buffer is finite: drop what cannot fit and complain at the next newline.
    if (this.inbox.length > MAX_LINE_LENGTH) {
      this.inbox = '';
      this.discarding = true;
    }
  }

  /** Powers the rig down: every load drops out, nothing more is sent, the truth stops here. */
  stop(): void {
    if (this.stopped) return;
    this.catchUp();
    for (const c of this.channels) {
      if (this.speaks11 && c.mode !== 'rest') c.setMode('rest', 'stop', ...this.when());
      else if (c.loadOn) c.switchLoad(false, 'stop', ...this.when());
    }
    if (this.frameTimer) this.clock.clearTimer(this.frameTimer);
    this.disarmWatchdog();
    this.stopped = true;
  }

  /** True state and totals of a channel (the first one if not given). */
  truth(channel?: number): SimTruth {
    this.catchUp();
    const c = this.channelOf(channel);
    const t = c.truthRec;
    return {
      elapsedS: t.elapsedS,
      chargeAh: t.chargeAh,
      energyWh: t.energyWh,
      loadOnS: t.loadOnS,
      stateOfCharge: c.cell.stateOfCharge,
      openCircuitV: c.cell.ocvV(),
      terminalV: c.point.terminalV,
      currentA: c.point.currentA,
      temperatureC: c.thermal.temperatureC,
      loadOn: c.loadOn,
      rigFault: c.fault,
      framesSent: c.framesSent,
      framesDropped: c.framesDropped,
      garbageLines: c.garbageLines,
    };
  }

  /** What a protocol 1.1 channel (the first one if not given) adds to its truth. */
  truth11(channel?: number): SimTruth11 {
    this.catchUp();
    const c = this.channelOf(channel);
    return {
      mode: c.mode,
      chargePhase: c.chargePhase,
      chargedAh: c.truthRec.chargedAh,
      targetA: c.targetA,
      setpointRaw: c.setpointRaw,
      setpointNotHeld: c.loadOn && c.notHeld,
      overpotentialV: c.cell.overpotentialV?.() ?? 0,
    };
  }

  /** Every mode change of a protocol 1.1 channel (the first one if not given), in order. */
  modeLog(channel?: number): readonly ModeSwitch[] {
    return this.channelOf(channel).modes;
  }

  /** Every load switch of a channel (the first one if not given) so far, in order. */
  loadLog(channel?: number): readonly LoadSwitch[] {
    return this.channelOf(channel).switches;
  }

  private channelOf(channel: number | undefined): SimChannel {
    const c = channel === undefined ? this.channels[0] : this.byNumber.get(channel);
    if (!c) throw new RangeError(`this rig has no channel ${String(channel)}`);
    return c;
  }

  private onLine(raw: string): void {
    const line = raw.endsWith('\r') ? raw.slice(0, -1) : raw;
    if (line === '') return;
    const cmd = this.speaks11 ? decodeHostLine11(line) : decodeHostLine(line);
    if ('error' in cmd) {
      this.send(frameLine(`E,${errorCode(cmd.error)},${cmd.error}`), true);
      return;
    }
    if (this.speaks11 && cmd.command !== 'HELLO' && cmd.command !== 'BEAT') {
      this.onCommand11(cmd);
      return;
    }
    switch (cmd.command) {
      case 'HELLO':
        this.sendHello();
        return;
      case 'BEAT':
        if (this.anyLoadOn()) this.armWatchdog();
        return;
      case 'LOAD': {
        const c = this.byNumber.get(cmd.channel);
        if (!c) {
          this.send(frameLine(`E,CHANNEL,no channel ${cmd.channel}`), true);
          return;
        }
        if (cmd.on) c.fault = false;
        if (cmd.on !== c.loadOn) this.switchLoad(c, cmd.on, 'host');
        this.send(frameLine(`A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`), true);
        return;
      }
    }
  }

  /** LOAD, MODE, ISET or PSET on a 1.1 rig: acknowledged and applied, or refused with nothing changed. */
  private onCommand11(cmd: Extract<HostCommand, { command: 'LOAD' }> | HostCommand11): void {
    const c = this.byNumber.get(cmd.channel);
    const d = decide11(cmd, c);
    if ('refuse' in d) {
      this.send(frameLine(d.refuse), true);
      return;
    }
    if (d.setpointRaw !== undefined) c!.setpointRaw = d.setpointRaw;
    const changed = d.mode !== undefined && d.mode !== c!.mode;
    if (d.mode !== undefined && d.mode !== 'rest') c!.fault = false;
    if (changed) {
      c!.setMode(d.mode!, 'host', ...this.when());
      if (this.anyLoadOn()) this.armWatchdog();
      else this.disarmWatchdog();
    }
    this.send(frameLine(d.ack), !changed);
    // Every mode change is followed by a frame at once, out of the regular period.
    if (changed) {
      const sinceBootMs = this.clock.now() - this.bootAt;
      this.sendFrame(c!, this.ticks.ticksAt(sinceBootMs), sinceBootMs, true);
    }
  }

  /** A load or a charger is on somewhere: the watchdog runs. */
  private anyLoadOn(): boolean {
    return this.channels.some((c) => c.loadOn || c.chargerOn);
  }

  /** Clock time now, and the time since the rig's boot. */
  private when(): [number, number] {
    const now = this.clock.now();
    return [now, now - this.bootAt];
  }

  private switchLoad(c: SimChannel, on: boolean, cause: LoadSwitch['cause']): void {
    c.switchLoad(on, cause, ...this.when());
    if (on) this.armWatchdog();
    else if (!this.anyLoadOn()) this.disarmWatchdog();
  }

  private armWatchdog(): void {
    this.disarmWatchdog();
    this.watchdogTimer = this.clock.setTimer(() => {
      this.watchdogTimer = null;
      this.catchUp();
      for (const c of this.channels) {
        if (!c.loadOn && !c.chargerOn) continue;
        c.fault = true;
        if (this.speaks11) c.setMode('rest', 'watchdog', ...this.when());
        else c.switchLoad(false, 'watchdog', ...this.when());
      }
      if (this.speaks11)
        this.send(frameLine('E,BEAT_LOST,no heartbeat for 5 s: every load cut'), true);
    }, WATCHDOG_MS);
  }

  private disarmWatchdog(): void {
    if (this.watchdogTimer) this.clock.clearTimer(this.watchdogTimer);
    this.watchdogTimer = null;
  }

  private onFrame(): void {
    this.catchUp();
    const sinceBootMs = this.clock.now() - this.bootAt;
    const tickMs = this.ticks.ticksAt(sinceBootMs);
    for (const c of this.channels) this.sendFrame(c, tickMs, sinceBootMs);
  }

  private sendFrame(c: SimChannel, tickMs: number, sinceBootMs: number, flush = false): void {
    const seq = c.seq;
    c.seq = (c.seq + 1) & 0xffff;
    if (this.faults.dropFrame()) {
      c.framesDropped++;
      return;
    }
    const counts = c.counts(sinceBootMs);
    const frame = encodeDataFrame({
      channel: c.channel,
      seq,
      tickMs,
      ...counts,
      flags: c.flags(),
    });
    const garbage = this.faults.garbageBefore(frame);
    if (garbage !== null) {
      c.garbageLines++;
      this.send(garbage, false);
    }
    c.framesSent++;
    this.pendingFrames++;
    this.send(frame, flush || this.pendingFrames >= this.faults.burstFrames);
  }

  /** Queues a line; `flush` writes everything queued, in order, as one chunk. */
  private send(line: string, flush: boolean): void {
    this.pending.push(line);
    if (!flush || !this.write) return;
    const chunk = this.pending.join('');
    this.pending = [];
    this.pendingFrames = 0;
    this.write(chunk);
  }

  /** The hello line; a 1.1 rig follows it at once with one `K` line per channel, in one write. */
  private sendHello(): void {
    const b = this.base;
    const hello = frameLine(
      `H,${b.rigId},${b.firmware},${b.profile.adc.bits},${this.channels.length}`,
    );
    if (!this.speaks11) {
      this.send(hello, true);
      return;
    }
    this.send(hello, false);
    this.channels.forEach((c, k) => {
      const cap = c.capability;
      const cc = cap?.constantCurrent ?? null;
      const line = encodeCapability({
        channel: c.channel,
        load: cc ? 'constant_current' : 'switched',
        iMinRaw: cc?.iMinRaw ?? 0,
        iMaxRaw: cc?.iMaxRaw ?? 0,
        pMaxRaw: 0,
        charger: cap?.charger ?? false,
      });
      this.send(line, k === this.channels.length - 1);
    });
  }

  /** Steps the physics of every channel from where it stopped up to the clock's now. */
  private catchUp(): void {
    if (!this.write || this.stopped) return;
    const now = this.clock.now();
    while (this.physicsAt < now) {
      const dtMs = Math.min(PHYSICS_STEP_MS, now - this.physicsAt);
      for (const c of this.channels) c.step(dtMs, this.physicsAt - this.bootAt);
      this.physicsAt += dtMs;
    }
  }
}

function errorCode(reason: string): string {
  switch (reason) {
    case 'bad_checksum':
    case 'no_checksum':
      return 'CRC';
    case 'out_of_range':
      return 'RANGE';
    case 'overlong':
      return 'OVERLONG';
    default:
      return 'SYNTAX';
  }
}
