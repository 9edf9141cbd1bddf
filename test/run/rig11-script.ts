/**
 * A scripted protocol 1.1 rig for driving program runs in tests: one channel with a
 * constant-current load and a charger, a cell whose open-circuit voltage is linear in its state
 * of charge behind a fixed internal resistance, and frames every 500 ms on a virtual clock. It
 * answers HELLO with its hello and `K` line (or, as a v1 rig, with the hello only), MODE and
 * ISET with their `A` lines, and reports the mode in the frames' flags (docs/protocol.md,
 * "Version 1.1"). The charger holds its current, then the voltage at 4.2 V, and switches itself
 * off below 1/20 of its current, as a charger module does (common practice).
 */
import { AnalogChain } from '../../src/chain/analog-chain.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import type { VirtualClock } from '../../src/core/clock.js';
import { encodeDataFrame, frameLine } from '../../src/protocol/codec.js';
import { decodeHostLine11, encodeCapability } from '../../src/protocol/codec11.js';
import type { ChannelMode } from '../../src/protocol/messages.js';
import type { Source, SourceHandlers } from '../../src/sources/source.js';

export interface ScriptedCell {
  capacityAh: number;
  soc: number;
  /** Open-circuit volts at empty and full (linear between). */
  emptyV: number;
  fullV: number;
  ohm: number;
  /** °C as a function of the rig's time, ms (a charge that overheats, for one). */
  celsius: (tMs: number, mode: ChannelMode) => number;
}

export interface ScriptedRigOptions {
  clock: VirtualClock;
  profile: RigProfile;
  cell: ScriptedCell;
  /** Speak v1 only: no K line, no 1.1 command understood. */
  v1?: boolean;
  chargerA: number;
  chargerV: number;
  frameMs?: number;
  /** Below this loaded voltage the load's trim is at its bound (flag bit 5), as a real one is. */
  trimBoundBelowV?: number;
  /** A charger that never ends its charge (its termination broken). */
  neverEnds?: boolean;
  /**
   * The rig's watchdog cut its outputs for an earlier host (one that crashed): flag bit 1 stays
   * set until a host switches something on again, as the reference firmware keeps it.
   */
  cutByEarlierHost?: boolean;
}

const FLAGS: Record<ChannelMode, number> = { rest: 0x00, discharge: 0x05, charge: 0x18 };

export class ScriptedRig11 implements Source {
  readonly kind = 'serial' as const;
  readonly description = 'scripted 1.1 rig';
  readonly chain: AnalogChain;
  /** Every command line the host sent, as received. */
  readonly received: string[] = [];
  mode: ChannelMode = 'rest';
  private staleCut: boolean;
  /** The true charge out of the cell (negative: into it), Ah. */
  chargeOutAh = 0;
  private handlers: SourceHandlers | null = null;
  private readonly pending: string[] = [];
  private seq = 0;
  private tMs = 0;
  private isetRaw: number | null = null;
  private lastBeatMs = 0;
  private timer: ReturnType<VirtualClock['setTimer']> | null = null;
  private chargerDone = false;

  constructor(private readonly o: ScriptedRigOptions) {
    this.chain = new AnalogChain(o.profile);
    this.staleCut = o.cutByEarlierHost ?? false;
  }

  async open(h: SourceHandlers): Promise<void> {
    this.handlers = h;
    this.hello();
    const frameMs = this.o.frameMs ?? 500;
    this.timer = this.o.clock.setTimer(() => this.step(frameMs), frameMs, true);
  }

  write(line: string): boolean {
    this.received.push(line.trim());
    const cmd = decodeHostLine11(line.trim());
    if ('error' in cmd) return true;
    if (cmd.command === 'HELLO') this.hello();
    else if (cmd.command === 'BEAT') this.lastBeatMs = this.tMs;
    else if (this.o.v1) this.reply(`E,SYNTAX,${cmd.command}`);
    else if (cmd.command === 'ISET') {
      this.isetRaw = cmd.raw;
      this.reply(`A,ISET,${cmd.channel},${cmd.raw}`);
    } else if (cmd.command === 'MODE') {
      this.mode = cmd.mode;
      if (cmd.mode !== 'rest') this.staleCut = false;
      this.chargerDone = false;
      this.lastBeatMs = this.tMs;
      this.reply(
        `A,MODE,${cmd.channel},${cmd.mode === 'rest' ? 'R' : cmd.mode === 'charge' ? 'C' : 'D'}`,
      );
    } else if (cmd.command === 'LOAD') {
      this.mode = cmd.on ? 'discharge' : 'rest';
      this.reply(`A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`);
    }
    return true;
  }

  async close(): Promise<void> {
    if (this.timer) this.o.clock.clearTimer(this.timer);
    this.timer = null;
  }

  private hello(): void {
    this.reply(`H,script,1.1.0,${this.o.profile.adc.bits},1`);
    if (!this.o.v1)
      this.pending.push(
        encodeCapability({
          channel: 0,
          load: 'constant_current',
          iMinRaw: 10,
          iMaxRaw: 3000,
          pMaxRaw: 0,
          charger: true,
        }).trim(),
      );
  }

  private reply(payload: string): void {
    this.pending.push(frameLine(payload).trim());
  }

  private ocv(): number {
    const { cell } = this.o;
    return cell.emptyV + (cell.fullV - cell.emptyV) * cell.soc;
  }

  /** The current out of the cell now (negative: into it), A. */
  private current(): number {
    const { cell } = this.o;
    if (this.mode === 'discharge') return this.isetRaw === null ? 0 : this.chain.amps(this.isetRaw);
    if (this.mode !== 'charge' || this.chargerDone) return 0;
    const cv = (this.o.chargerV - this.ocv()) / cell.ohm;
    const into = Math.max(0, Math.min(this.o.chargerA, cv));
    if (into < this.o.chargerA / 20 && !this.o.neverEnds) this.chargerDone = true;
    if (this.o.neverEnds) return -this.o.chargerA;
    return this.chargerDone ? 0 : -into;
  }

  private step(frameMs: number): void {
    this.tMs += frameMs;
    // The rig's watchdog: 5 s without a heartbeat switches everything off.
    if (this.mode !== 'rest' && this.tMs - this.lastBeatMs > 5000) this.mode = 'rest';
    const { cell } = this.o;
    const amps = this.current();
    this.chargeOutAh += (amps * frameMs) / 3_600_000;
    cell.soc = Math.min(1, Math.max(0, cell.soc - (amps * frameMs) / 3_600_000 / cell.capacityAh));
    const volts = this.ocv() - amps * cell.ohm;
    const charging = amps < 0;
    const chargerApc = this.chain.adcVoltsPerCount * this.o.profile.charger!.monitor_A_per_V;
    const iRaw = Math.min(
      2 ** this.o.profile.adc.bits - 1,
      Math.round(charging ? -amps / chargerApc : amps / this.chain.ampsPerCount),
    );
    const bound = this.mode === 'discharge' && volts < (this.o.trimBoundBelowV ?? -Infinity);
    const flags = this.o.v1
      ? this.mode === 'discharge'
        ? 1
        : 0
      : FLAGS[this.mode] | (bound ? 0x20 : 0) | (this.staleCut ? 0x02 : 0);
    const lines = this.pending.splice(0);
    lines.push(
      encodeDataFrame({
        channel: 0,
        seq: this.seq++ & 0xffff,
        tickMs: this.tMs,
        vRaw: Math.round(volts / this.chain.voltsPerCount),
        iRaw,
        tRaw: this.countsFor(cell.celsius(this.tMs, this.mode)),
        flags,
      }).trim(),
    );
    for (const l of lines) this.handlers?.line(l);
  }

  private readonly tCounts = new Map<number, number>();

  private countsFor(celsius: number): number {
    const key = Math.round(celsius * 10);
    const known = this.tCounts.get(key);
    if (known !== undefined) return known;
    let best = 0;
    let err = Infinity;
    for (let raw = 1; raw < 2 ** this.o.profile.adc.bits - 1; raw += 1) {
      if (this.chain.thermistorState(raw) !== 'ok') continue;
      const e = Math.abs(this.chain.celsius(raw) - celsius);
      if (e < err) {
        err = e;
        best = raw;
      }
    }
    this.tCounts.set(key, best);
    return best;
  }
}
