import type { RigProfile } from '../chain/rig-profile-types.js';
import { makeError, ErrorCodes } from '../core/errors.js';
import type { ChannelMode } from '../protocol/messages.js';
import type { Cell } from './cell-model.js';
import type { CircuitFaults } from './faults.js';
import { FrontEnd, type FrontEndErrors } from './front-end.js';
import { gaussian, type Rng } from './prng.js';
import {
  Charger,
  constantCurrentPoint,
  type ChargePhase,
  type ConstantCurrentOptions,
  type ChargerOptions,
} from './regulators.js';
import { ThermalModel, type ThermalOptions } from './thermal.js';
import { TruthRecorder, type ElectricalPoint } from './truth.js';

/** A thermistor as wired: `open` (a broken lead) or `short` reads as the rail, not as a temperature. */
export type ThermistorWiring = 'ok' | 'open' | 'short';

/** One channel of a simulated rig: its cell, load, front end and thermistor. */
export interface SimChannelOptions {
  /** The channel number in the protocol, 0..15. */
  channel: number;
  cell: Cell;
  thermal: ThermalOptions;
  loadOhm: number;
  /** MOSFET on-resistance, in series with the load. */
  mosfetOhm: number;
  frontEnd: FrontEndErrors;
  /** @default 'ok' */
  thermistor?: ThermistorWiring;
  /**
   * A thermistor that breaks in use: it reads right until this long after the load first went
   * on (a break mid-discharge, however long the host took to start it).
   */
  thermistorFailsAfterMs?: number;
  /** Faults of this channel's own circuit (an open load, a broken sense wire). */
  circuit?: CircuitFaults;
  /**
   * A constant-current load (protocol 1.1): `loadOhm` is then its source resistor, in series
   * with the MOSFET; without it the load is a switched resistor (v1).
   */
  constantCurrent?: ConstantCurrentOptions;
  /** A charger module the rig switches (protocol 1.1); its monitor figure from the rig profile. */
  charger?: Omit<ChargerOptions, 'monitorAPerV'>;
}

/** A mode change of a protocol 1.1 channel. */
export interface ModeSwitch {
  atMs: number;
  mode: ChannelMode;
  cause: LoadSwitch['cause'];
}

export interface LoadSwitch {
  /** Clock time (`clock.now()`) of the switch. */
  atMs: number;
  on: boolean;
  cause: 'host' | 'watchdog' | 'stop';
}

/** Raw counts of one conversion of a channel's three inputs. */
export interface ChannelCounts {
  vRaw: number;
  iRaw: number;
  tRaw: number;
}

/**
 * The physics of one channel: the cell under its load, heating and cooling, read through the
 * board's imperfect front end. The rig around it owns the link, the clock and the watchdog.
 */
export class SimChannel {
  readonly channel: number;
  readonly truthRec = new TruthRecorder();
  readonly switches: LoadSwitch[] = [];
  readonly thermal: ThermalModel;
  point: ElectricalPoint = { currentA: 0, terminalV: 0 };
  loadOn = false;
  /** The charger is switched on (protocol 1.1; never together with the load). */
  chargerOn = false;
  /** The constant-current setpoint, counts; 0 until the host sets one. */
  setpointRaw = 0;
  /** The constant-current load cannot hold its setpoint (flag bit 5). */
  notHeld = false;
  readonly modes: ModeSwitch[] = [];
  readonly charger: Charger | null;
  /** When the load first went on, ms after the rig's boot; null until then. */
  private firstOnMs: number | null = null;
  /** Flag bit 1: set when the rig itself cut this channel's load, cleared by the next LOAD on. */
  fault = false;
  seq = 0;
  framesSent = 0;
  framesDropped = 0;
  garbageLines = 0;
  private readonly frontEnd: FrontEnd;
  /** Everything in series with the cell's internal resistance when the load is on. */
  private readonly externalOhm: number;
  private readonly railCount: number;
  private readonly monitorAPerV: number;

  constructor(
    private readonly opts: SimChannelOptions,
    profile: RigProfile,
    private readonly rng: Rng,
  ) {
    this.channel = opts.channel;
    if (!Number.isInteger(this.channel) || this.channel < 0 || this.channel > 15) {
      throw new RangeError(`channel must be 0..15, got ${this.channel}`);
    }
    this.frontEnd = new FrontEnd(profile, opts.frontEnd, rng);
    this.thermal = new ThermalModel(opts.thermal);
    this.externalOhm =
      opts.loadOhm + opts.mosfetOhm + profile.current.shunt_ohm + opts.frontEnd.connectionOhm;
    // An open NTC in the low position leaves the input pulled to the reference, a short to ground.
    const top = 2 ** profile.adc.bits - 1;
    const low = profile.temperature.ntc_position === 'low';
    this.railCount = (opts.thermistor === 'open') === low ? top : 0;
    this.monitorAPerV = profile.charger?.monitor_A_per_V ?? 0;
    if (opts.charger && !(this.monitorAPerV > 0))
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        `channel ${this.channel} has a charger and the rig profile gives no charger monitor`,
        `rig profile "${profile.name ?? 'unnamed'}", key charger.monitor_A_per_V`,
        'Use a rig profile for a rig with chargers (config/rigs/sim-cc.yaml for the simulated one).',
      );
    const cc = opts.constantCurrent;
    if (cc && !(cc.iMinRaw >= 1 && cc.iMinRaw <= cc.iMaxRaw && cc.iMaxRaw <= top))
      throw new RangeError(
        `channel ${this.channel}: setpoint range ${cc.iMinRaw}..${cc.iMaxRaw} must lie in 1..${top}`,
      );
    this.charger = opts.charger
      ? new Charger({ ...opts.charger, monitorAPerV: this.monitorAPerV })
      : null;
    this.point = this.electrical(0);
  }

  get cell(): Cell {
    return this.opts.cell;
  }

  /** What the channel declares in its `K` line; null for a v1 channel (a switched load, no charger). */
  get capability(): { constantCurrent: ConstantCurrentOptions | null; charger: boolean } | null {
    const cc = this.opts.constantCurrent ?? null;
    if (!cc && !this.charger) return null;
    return { constantCurrent: cc, charger: this.charger !== null };
  }

  get mode(): ChannelMode {
    return this.chargerOn ? 'charge' : this.loadOn ? 'discharge' : 'rest';
  }

  get chargePhase(): ChargePhase | 'off' {
    return this.chargerOn && this.charger ? this.charger.chargePhase : 'off';
  }

  /** The true current the constant-current load is set to draw, amps; 0 without a setpoint. */
  get targetA(): number {
    return this.setpointRaw > 0 ? this.frontEnd.currentForCounts(this.setpointRaw) : 0;
  }

  /**
   * Switches a protocol 1.1 channel's mode at clock time `atMs`: break-before-make, so the
   * load and the charger are never on together; entering charge starts a fresh charge.
   */
  setMode(mode: ChannelMode, cause: LoadSwitch['cause'], atMs: number, sinceBootMs: number): void {
    const wasLoad = this.loadOn;
    this.loadOn = false;
    this.chargerOn = false;
    if (mode === 'discharge') {
      this.loadOn = true;
      this.firstOnMs ??= sinceBootMs;
    }
    if (mode === 'charge') {
      this.chargerOn = true;
      this.charger?.restart();
    }
    if (wasLoad !== this.loadOn) this.switches.push({ atMs, on: this.loadOn, cause });
    this.modes.push({ atMs, mode, cause });
    this.point = this.electrical(sinceBootMs);
  }

  /** Flag bits of a frame now (docs/protocol.md: bits 0–1 as v1, 2–5 as 1.1 says). */
  flags(): number {
    const fault = this.fault ? 0x02 : 0;
    if (this.chargerOn) return 0x08 | 0x10 | fault;
    if (!this.loadOn) return fault;
    if (!this.opts.constantCurrent) return 0x01 | fault;
    return 0x01 | 0x04 | (this.notHeld ? 0x20 : 0) | fault;
  }

  /** Switches the load at clock time `atMs`, `sinceBootMs` after the rig's boot. */
  switchLoad(on: boolean, cause: LoadSwitch['cause'], atMs: number, sinceBootMs: number): void {
    this.loadOn = on;
    if (on) this.firstOnMs ??= sinceBootMs;
    this.point = this.electrical(sinceBootMs);
    this.switches.push({ atMs, on, cause });
  }

  /** The three conversions of a frame `sinceBootMs` after the rig's boot, in the order the front end's noise is drawn. */
  counts(sinceBootMs: number): ChannelCounts {
    const sense = this.opts.circuit?.voltageSense;
    const measured = this.frontEnd.voltage(this.point.terminalV).counts;
    const vRaw =
      sense && sinceBootMs >= sense.fromMs && sinceBootMs < sense.toMs ? sense.counts : measured;
    const iRaw = this.chargerOn
      ? this.frontEnd.chargerMonitor(-this.point.currentA, this.monitorAPerV).counts
      : this.frontEnd.current(this.point.currentA).counts;
    const tRaw = this.frontEnd.temperature(this.thermal.temperatureC).counts;
    const after = this.opts.thermistorFailsAfterMs;
    const broken =
      (this.opts.thermistor ?? 'ok') !== 'ok' &&
      (after === undefined || (this.firstOnMs !== null && sinceBootMs - this.firstOnMs >= after));
    return { vRaw, iRaw, tRaw: broken ? this.railCount : tRaw };
  }

  /** One physics step of `dtMs` starting `sinceBootMs` after the rig's boot, the load state fixed within it. */
  step(dtMs: number, sinceBootMs: number): void {
    const dtS = dtMs / 1000;
    const a = this.point;
    const rCell = this.opts.cell.internalOhm(this.thermal.temperatureC);
    this.opts.cell.step(dtS, a.currentA);
    this.thermal.step(dtS, this.heatW(a.currentA, rCell));
    const b = this.electrical(sinceBootMs);
    this.truthRec.add(dtS, a, b, this.loadOn);
    this.point = b;
  }

  /** Heat into the cell: the load's share when discharging, the charger module's when charging. */
  private heatW(currentA: number, rCell: number): number {
    if (!this.chargerOn) return this.thermal.heatW(currentA, rCell, this.opts.loadOhm);
    const module = currentA < 0 ? (this.opts.charger?.heatToCellW ?? 0) : 0;
    return this.thermal.heatW(currentA, rCell, 0) + module;
  }

  private electrical(sinceBootMs: number): ElectricalPoint {
    if (this.chargerOn || (this.loadOn && this.opts.constantCurrent)) return this.regulated();
    // Polarisation is zero for a cell without it, so a v1 scenario's figures stay as they were.
    const ocv = this.opts.cell.ocvV() + (this.opts.cell.overpotentialV?.() ?? 0);
    const openAt = this.opts.circuit?.openLoadAtMs;
    const open = openAt !== undefined && sinceBootMs >= openAt;
    if (!this.loadOn || open) return { currentA: 0, terminalV: ocv };
    const rCell = this.opts.cell.internalOhm(this.thermal.temperatureC);
    const currentA = ocv / (this.externalOhm + rCell);
    return { currentA, terminalV: ocv - currentA * rCell };
  }

  /** The point of a charging channel or a constant-current load (protocol 1.1 only). */
  private regulated(): ElectricalPoint {
    const cell = this.opts.cell;
    const source = {
      emfV: cell.ocvV() + (cell.overpotentialV?.() ?? 0),
      internalOhm: cell.internalOhm(this.thermal.temperatureC),
    };
    if (this.chargerOn) return this.charger!.point(source);
    const ripple = gaussian(this.rng);
    const p = constantCurrentPoint(
      source,
      this.targetA,
      this.externalOhm,
      this.opts.constantCurrent!,
      ripple,
    );
    this.notHeld = p.notHeld;
    return { currentA: p.currentA, terminalV: p.terminalV };
  }
}
