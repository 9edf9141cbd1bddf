import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { checkRestingVoltage } from '../../src/chemistry/limits.js';
import type { HostCommand } from '../../src/protocol/messages.js';
import { FLAG_LOAD_ON } from '../../src/protocol/messages.js';
import { plausibilityFor } from '../../src/session/plausibility.js';
import { Session, type SessionSettings } from '../../src/session/session.js';
import type { Action, Measurement } from '../../src/session/session-types.js';

/** What the synthetic cell and sensors read at a moment; the load flag comes from the bench. */
export interface Reading {
  volts: number;
  amps: number;
  celsius: number;
  thermistor: Measurement['thermistor'];
  /** Flag bits besides the load (e.g. the rig fault bit). */
  flags: number;
}

export const LI_ION = findChemistry(loadChemistries(), 'li-ion');

/** One Li-ion cell (common practice: cutoff 3.0 V, floor 2.5 V, 60 °C) on channel 0. */
export function liIonSettings(over: Partial<SessionSettings> = {}): SessionSettings {
  return {
    channel: 0,
    cutoffV: LI_ION.cutoff_V_per_cell.value,
    floorV: LI_ION.floor_V_per_cell.value,
    maxTemperatureC: LI_ION.max_temperature_C.value,
    maxCurrentA: 5,
    // The bench rig's current channel: 3.3 V / 4096 counts / (30.3 × 0.02 Ω) = 1.33 mA a count.
    plausibility: plausibilityFor({
      maxRestVPerCell: LI_ION.max_rest_V_per_cell.value,
      cells: 1,
      ampsPerCount: 3.3 / 4096 / (30.3 * 0.02),
    }),
    checkRest: (restV) => {
      const r = checkRestingVoltage(LI_ION, 1, restV, LI_ION.cutoff_V_per_cell.value);
      return r.ok ? null : r.error.message;
    },
    ...over,
  };
}

export interface RigBehaviour {
  /** Switches its load when told. @default true */
  obeys: boolean;
  /** Acknowledges LOAD commands. @default false (the load flag confirms instead) */
  acks: boolean;
  /** Sends frames at all. @default true */
  talks: boolean;
}

/**
 * A session on a synthetic rig with injected time: a frame every `frameMs`, a `tick` after
 * each, the rig switching its load as commanded, and every action kept for the assertions.
 */
export class Bench {
  t = 0;
  loadOn = false;
  readonly session: Session;
  readonly actions: { at: number; action: Action }[] = [];
  readonly rig: RigBehaviour = { obeys: true, acks: false, talks: true };
  reading: (t: number, loadOn: boolean) => Reading;

  constructor(
    settings: SessionSettings = liIonSettings(),
    readonly frameMs = 100,
  ) {
    this.session = new Session(settings);
    // A healthy cell: 4.00 V at rest, 0.1 Ω, 1 A with the load on, 25 °C.
    this.reading = (_t, on) => ({
      volts: on ? 3.9 : 4.0,
      amps: on ? 1 : 0,
      celsius: 25,
      thermistor: 'ok',
      flags: 0,
    });
    this.take(this.session.begin(this.t));
  }

  /** Advances one frame period: a frame (if the rig talks), then the periodic tick. */
  step(): void {
    this.t += this.frameMs;
    if (this.rig.talks) {
      const r = this.reading(this.t, this.loadOn);
      const m: Measurement = {
        hostMs: this.t,
        dtMs: this.frameMs,
        gap: false,
        volts: r.volts,
        amps: r.amps,
        celsius: r.celsius,
        thermistor: r.thermistor,
        flags: r.flags | (this.loadOn ? FLAG_LOAD_ON : 0),
      };
      this.take(this.session.frame(m));
    }
    this.take(this.session.tick(this.t));
  }

  /** Steps for `ms`, or until `until` holds; returns the time it held at (or null). */
  run(ms: number, until: () => boolean = () => false): number | null {
    const end = this.t + ms;
    while (this.t < end) {
      this.step();
      if (until()) return this.t;
    }
    return null;
  }

  /** Runs from power-up to the discharging state. */
  start(): void {
    const at = this.run(10_000, () => this.session.state === 'discharging');
    if (at === null) throw new Error(`did not start: ${this.session.state}`);
  }

  get sent(): { at: number; command: HostCommand }[] {
    return this.actions.flatMap(({ at, action }) =>
      action.type === 'send' ? [{ at, command: action.command }] : [],
    );
  }

  loadCommands(on: boolean): number[] {
    return this.sent
      .filter((s) => s.command.command === 'LOAD' && s.command.on === on)
      .map((s) => s.at);
  }

  beats(): number[] {
    return this.sent.filter((s) => s.command.command === 'BEAT').map((s) => s.at);
  }

  get end(): Extract<Action, { type: 'end' }> | undefined {
    for (const { action } of this.actions) if (action.type === 'end') return action;
    return undefined;
  }

  events(name: string): Record<string, unknown>[] {
    return this.actions.flatMap(({ action }) =>
      action.type === 'event' && action.name === name ? [action.detail] : [],
    );
  }

  states(): string[] {
    return ['waiting', ...this.events('state').map((d) => d['to'] as string)];
  }

  /** Records actions the test got from the session directly (stop requests, acks). */
  take(actions: Action[]): void {
    for (const action of actions) {
      this.actions.push({ at: this.t, action });
      if (action.type === 'send' && action.command.command === 'LOAD') {
        const { on, channel } = action.command;
        if (this.rig.obeys) this.loadOn = on;
        if (this.rig.acks) this.take(this.session.ack('LOAD', [String(channel), on ? '1' : '0']));
      }
    }
  }
}
