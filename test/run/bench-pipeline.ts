import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { applyCalibration } from '../../src/calibration/calibration.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { parseRigProfile } from '../../src/chain/rig-profile-file.js';
import { encodeDataFrame } from '../../src/protocol/codec.js';
import { FLAG_LOAD_ON } from '../../src/protocol/messages.js';
import { Pipeline, type LineOutcome } from '../../src/run/pipeline.js';
import type { Action } from '../../src/session/session-types.js';
import { Session } from '../../src/session/session.js';
import { liIonSettings } from '../session/bench.js';

const RIG_FILE = fileURLToPath(new URL('../../config/rigs/bench-20mohm.yaml', import.meta.url));
export const PROFILE = parseRigProfile(readFileSync(RIG_FILE, 'utf8'), RIG_FILE);
export const CHAIN = new AnalogChain(PROFILE);

export function newPipeline(session = new Session(liIonSettings())): {
  pipeline: Pipeline;
  session: Session;
} {
  const pipeline = new Pipeline({
    channel: 0,
    adcBits: PROFILE.adc.bits,
    converter: CHAIN,
    corrector: applyCalibration(null),
    session,
    originMs: 0,
  });
  return { pipeline, session };
}

/** What the cell reads at a moment, in physical units. */
export interface CellState {
  volts: number;
  amps: number;
  celsius: number;
}

/**
 * A synthetic rig in front of a pipeline: it turns physical values into counts through the
 * bench rig's chain, frames them with the protocol, switches its load when commanded, and
 * sends a frame every 100 ms (rig clock and host clock equal).
 */
export class LineRig {
  seq = 0;
  t = 0;
  loadOn = false;
  /** A fixed thermistor count instead of the cell's temperature (a broken or shorted sensor). */
  tRaw: number | null = null;
  readonly outcomes: LineOutcome[] = [];

  readonly pipeline: Pipeline;
  readonly session: Session;

  constructor(
    core: { pipeline: Pipeline; session: Session } = newPipeline(),
    public cell: (t: number, loadOn: boolean) => CellState = (_t, on) => ({
      volts: on ? 3.9 : 4.0,
      amps: on ? 1 : 0,
      celsius: 25,
    }),
    readonly channel = 0,
  ) {
    this.pipeline = core.pipeline;
    this.session = core.session;
  }

  /** The data line the rig would send now (without its newline). */
  line(over: Partial<{ seq: number; tick: number; flags: number }> = {}): string {
    const c = this.cell(this.t, this.loadOn);
    return encodeDataFrame({
      channel: this.channel,
      seq: over.seq ?? this.seq % 65536,
      tickMs: over.tick ?? this.t % 2 ** 32,
      vRaw: Math.round(CHAIN.countsForVolts(c.volts)),
      iRaw: Math.round(CHAIN.countsForAmps(c.amps)),
      tRaw: this.tRaw ?? Math.round(CHAIN.countsForCelsius(c.celsius)),
      flags: over.flags ?? (this.loadOn ? FLAG_LOAD_ON : 0),
    }).trimEnd();
  }

  /** Feeds any line at the current time and carries out the LOAD commands that come back. */
  feed(text: string): LineOutcome {
    const out = this.pipeline.line(text, this.t, Date.UTC(2026, 0, 1) + this.t);
    this.outcomes.push(out);
    if (out.kind === 'sample' || out.kind === 'message') this.obey(out.actions);
    return out;
  }

  /** One frame period: the next data frame, then the session's tick. */
  step(): LineOutcome {
    this.t += 100;
    const out = this.feed(this.line());
    this.seq++;
    this.obey(this.session.tick(this.t));
    return out;
  }

  run(ms: number, until: () => boolean = () => false): void {
    const end = this.t + ms;
    while (this.t < end && !until()) this.step();
  }

  private obey(actions: Action[]): void {
    for (const a of actions)
      if (a.type === 'send' && a.command.command === 'LOAD' && a.command.channel === this.channel)
        this.loadOn = a.command.on;
  }
}
