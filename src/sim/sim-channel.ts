import type { RigProfile } from '../chain/rig-profile-types.js';
import type { Cell } from './cell-model.js';
import type { CircuitFaults } from './faults.js';
import { FrontEnd, type FrontEndErrors } from './front-end.js';
import type { Rng } from './prng.js';
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

  constructor(
    private readonly opts: SimChannelOptions,
    profile: RigProfile,
    rng: Rng,
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
    this.point = this.electrical(0);
  }

  get cell(): Cell {
    return this.opts.cell;
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
    const iRaw = this.frontEnd.current(this.point.currentA).counts;
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
    this.thermal.step(dtS, this.thermal.heatW(a.currentA, rCell, this.opts.loadOhm));
    const b = this.electrical(sinceBootMs);
    this.truthRec.add(dtS, a, b, this.loadOn);
    this.point = b;
  }

  private electrical(sinceBootMs: number): ElectricalPoint {
    const ocv = this.opts.cell.ocvV();
    const openAt = this.opts.circuit?.openLoadAtMs;
    const open = openAt !== undefined && sinceBootMs >= openAt;
    if (!this.loadOn || open) return { currentA: 0, terminalV: ocv };
    const rCell = this.opts.cell.internalOhm(this.thermal.temperatureC);
    const currentA = ocv / (this.externalOhm + rCell);
    return { currentA, terminalV: ocv - currentA * rCell };
  }
}
