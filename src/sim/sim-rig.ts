import type { RigProfile } from '../chain/rig-profile-types.js';
import type { Clock, TimerHandle } from '../core/clock.js';
import { decodeHostLine, encodeDataFrame, frameLine, MAX_LINE_LENGTH } from '../protocol/codec.js';
import { FLAG_LOAD_ON, FLAG_RIG_FAULT } from '../protocol/messages.js';
import type { Cell } from './cell-model.js';
import { FaultInjector, NO_FAULTS, type CircuitFaults, type FaultOptions } from './faults.js';
import { FrontEnd, type FrontEndErrors } from './front-end.js';
import { mulberry32 } from './prng.js';
import { RigTickCounter } from './rig-clock.js';
import { ThermalModel, type ThermalOptions } from './thermal.js';
import { TruthRecorder, type ElectricalPoint } from './truth.js';

/** Protocol v1: a rig that hears no heartbeat for this long while a load is on cuts every load. */
export const WATCHDOG_MS = 5000;

export interface SimRigOptions {
  clock: Clock;
  profile: RigProfile;
  cell: Cell;
  thermal: ThermalOptions;
  loadOhm: number;
  /** MOSFET on-resistance, in series with the load. */
  mosfetOhm: number;
  frontEnd: FrontEndErrors;
  /** Rate error of the rig's oscillator: +0.12 counts 12 % fast. */
  clockError: number;
  /** Tick counter value at boot (a real rig boots at 0; a high start exercises the 2^32 wrap). */
  startTick?: number;
  /** Frame period in rig milliseconds; 100 if omitted. */
  framePeriodMs?: number;
  /** The one channel this rig has; 0 if omitted. */
  channel?: number;
  rigId: string;
  firmware: string;
  faults?: FaultOptions;
  circuit?: CircuitFaults;
  /** Seed of the noise and fault generator; the same seed gives the same run. */
  seed?: number;
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
  currentA: number;
  temperatureC: number;
  loadOn: boolean;
  rigFault: boolean;
  framesSent: number;
  framesDropped: number;
  garbageLines: number;
}

export interface LoadSwitch {
  /** Clock time (`clock.now()`) of the switch. */
  atMs: number;
  on: boolean;
  cause: 'host' | 'watchdog' | 'stop';
}

/**
 * Physics step: far below the cell's electrical and thermal time constants (seconds and up),
 * and the rig steps to every command and frame instant as well, so switches land exactly.
 */
const PHYSICS_STEP_MS = 10;

/**
 * A simulated single-channel rig speaking protocol v1, with a cell on its load.
 * Replies: LOAD → `A,LOAD,<ch>,<0|1>`; HELLO → a hello line; BEAT → nothing (a reply once a
 * second would only double the traffic; the watchdog is the rig's whole use of it); anything
 * else → `E,<code>,<text>` with code CRC, SYNTAX, RANGE, CHANNEL or OVERLONG.
 * The watchdog counts true time from the later of the last BEAT and the load switching on.
 */
export class SimRig {
  private readonly clock: Clock;
  private readonly frontEnd: FrontEnd;
  private readonly thermal: ThermalModel;
  private readonly ticks: RigTickCounter;
  private readonly faults: FaultInjector;
  private readonly truthRec = new TruthRecorder();
  private readonly switches: LoadSwitch[] = [];
  private readonly channel: number;
  private readonly framePeriodMs: number;

  private write: ((chunk: string) => void) | null = null;
  private stopped = false;
  private bootAt = 0;
  private physicsAt = 0;
  private point: ElectricalPoint = { currentA: 0, terminalV: 0 };
  private loadOn = false;
  private fault = false;
  private seq = 0;
  private pending: string[] = [];
  private pendingFrames = 0;
  private inbox = '';
  private discarding = false;
  private frameTimer: TimerHandle | null = null;
  private watchdogTimer: TimerHandle | null = null;
  private framesSent = 0;
  private framesDropped = 0;
  private garbageLines = 0;

  constructor(private readonly opts: SimRigOptions) {
    this.clock = opts.clock;
    this.channel = opts.channel ?? 0;
    this.framePeriodMs = opts.framePeriodMs ?? 100;
    if (!Number.isInteger(this.channel) || this.channel < 0 || this.channel > 15) {
      throw new RangeError(`channel must be 0..15, got ${this.channel}`);
    }
    if (!(this.framePeriodMs > 0))
      throw new RangeError(`frame period must be positive, got ${this.framePeriodMs} ms`);
    if (
      !/^[\x21-\x7e]+$/.test(opts.rigId + opts.firmware) ||
      /[,|]/.test(opts.rigId + opts.firmware)
    ) {
      throw new RangeError('rig id and firmware must be printable, without spaces, commas or "|"');
    }
    const rng = mulberry32(opts.seed ?? 1);
    this.frontEnd = new FrontEnd(opts.profile, opts.frontEnd, rng);
    this.thermal = new ThermalModel(opts.thermal);
    this.ticks = new RigTickCounter(opts.clockError, opts.startTick ?? 0);
    this.faults = new FaultInjector(opts.faults ?? NO_FAULTS, rng);
    this.point = this.electrical();
  }

  /** Powers the rig up: a hello at once, then a data frame every frame period of rig time. */
  start(write: (chunk: string) => void): void {
    if (this.write || this.stopped) throw new Error('a SimRig starts once');
    this.write = write;
    this.bootAt = this.clock.now();
    this.physicsAt = this.bootAt;
    this.send(this.helloLine(), true);
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

  /** Powers the rig down: the load drops out, nothing more is sent, the truth stops here. */
  stop(): void {
    if (this.stopped) return;
    this.catchUp();
    if (this.loadOn) this.switchLoad(false, 'stop');
    if (this.frameTimer) this.clock.clearTimer(this.frameTimer);
    this.disarmWatchdog();
    this.stopped = true;
  }

  truth(): SimTruth {
    this.catchUp();
    const t = this.truthRec;
    return {
      elapsedS: t.elapsedS,
      chargeAh: t.chargeAh,
      energyWh: t.energyWh,
      loadOnS: t.loadOnS,
      stateOfCharge: this.opts.cell.stateOfCharge,
      openCircuitV: this.opts.cell.ocvV(),
      terminalV: this.point.terminalV,
      currentA: this.point.currentA,
      temperatureC: this.thermal.temperatureC,
      loadOn: this.loadOn,
      rigFault: this.fault,
      framesSent: this.framesSent,
      framesDropped: this.framesDropped,
      garbageLines: this.garbageLines,
    };
  }

  /** Every load switch so far, in order. */
  loadLog(): readonly LoadSwitch[] {
    return this.switches;
  }

  private onLine(raw: string): void {
    const line = raw.endsWith('\r') ? raw.slice(0, -1) : raw;
    if (line === '') return;
    const cmd = decodeHostLine(line);
    if ('error' in cmd) {
      this.send(frameLine(`E,${errorCode(cmd.error)},${cmd.error}`), true);
      return;
    }
    switch (cmd.command) {
      case 'HELLO':
        this.send(this.helloLine(), true);
        return;
      case 'BEAT':
        if (this.loadOn) this.armWatchdog();
        return;
      case 'LOAD':
        if (cmd.channel !== this.channel) {
          this.send(frameLine(`E,CHANNEL,no channel ${cmd.channel}`), true);
          return;
        }
        if (cmd.on) this.fault = false;
        if (cmd.on !== this.loadOn) this.switchLoad(cmd.on, 'host');
        this.send(frameLine(`A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`), true);
        return;
    }
  }

  private switchLoad(on: boolean, cause: LoadSwitch['cause']): void {
    this.loadOn = on;
    this.point = this.electrical();
    this.switches.push({ atMs: this.clock.now(), on, cause });
    if (on) this.armWatchdog();
    else this.disarmWatchdog();
  }

  private armWatchdog(): void {
    this.disarmWatchdog();
    this.watchdogTimer = this.clock.setTimer(() => {
      this.watchdogTimer = null;
      this.catchUp();
      this.fault = true;
      this.switchLoad(false, 'watchdog');
    }, WATCHDOG_MS);
  }

  private disarmWatchdog(): void {
    if (this.watchdogTimer) this.clock.clearTimer(this.watchdogTimer);
    this.watchdogTimer = null;
  }

  private onFrame(): void {
    this.catchUp();
    const seq = this.seq;
    this.seq = (this.seq + 1) & 0xffff;
    if (this.faults.dropFrame()) {
      this.framesDropped++;
      return;
    }
    const sinceBoot = this.clock.now() - this.bootAt;
    const sense = this.opts.circuit?.voltageSense;
    const vRaw = this.frontEnd.voltage(this.point.terminalV).counts;
    const frame = encodeDataFrame({
      channel: this.channel,
      seq,
      tickMs: this.ticks.ticksAt(sinceBoot),
      vRaw: sense && sinceBoot >= sense.fromMs && sinceBoot < sense.toMs ? sense.counts : vRaw,
      iRaw: this.frontEnd.current(this.point.currentA).counts,
      tRaw: this.frontEnd.temperature(this.thermal.temperatureC).counts,
      flags: (this.loadOn ? FLAG_LOAD_ON : 0) | (this.fault ? FLAG_RIG_FAULT : 0),
    });
    const garbage = this.faults.garbageBefore(frame);
    if (garbage !== null) {
      this.garbageLines++;
      this.send(garbage, false);
    }
    this.framesSent++;
    this.pendingFrames++;
    this.send(frame, this.pendingFrames >= this.faults.burstFrames);
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

  private helloLine(): string {
    return frameLine(`H,${this.opts.rigId},${this.opts.firmware},${this.opts.profile.adc.bits},1`);
  }

  /** Everything in series with the cell's internal resistance when the load is on. */
  private externalOhm(): number {
    return (
      this.opts.loadOhm +
      this.opts.mosfetOhm +
      this.opts.profile.current.shunt_ohm +
      this.opts.frontEnd.connectionOhm
    );
  }

  private electrical(): ElectricalPoint {
    const ocv = this.opts.cell.ocvV();
    const openAt = this.opts.circuit?.openLoadAtMs;
    const open = openAt !== undefined && this.physicsAt - this.bootAt >= openAt;
    if (!this.loadOn || open) return { currentA: 0, terminalV: ocv };
    const rCell = this.opts.cell.internalOhm(this.thermal.temperatureC);
    const currentA = ocv / (this.externalOhm() + rCell);
    return { currentA, terminalV: ocv - currentA * rCell };
  }

  /** Steps the physics from where it stopped up to the clock's now. */
  private catchUp(): void {
    if (!this.write || this.stopped) return;
    const now = this.clock.now();
    while (this.physicsAt < now) {
      const dtMs = Math.min(PHYSICS_STEP_MS, now - this.physicsAt);
      const dtS = dtMs / 1000;
      const a = this.point;
      const rCell = this.opts.cell.internalOhm(this.thermal.temperatureC);
      this.opts.cell.step(dtS, a.currentA);
      this.thermal.step(dtS, this.thermal.heatW(a.currentA, rCell, this.opts.loadOhm));
      const b = this.electrical();
      this.truthRec.add(dtS, a, b, this.loadOn);
      this.point = b;
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
